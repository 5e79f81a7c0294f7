"""Rendering results for the terminal with rich (only the CLI imports this module)."""

from __future__ import annotations

import json
import os
import sys
import threading
import time
from typing import Any

from rich.console import Console, JustifyMethod
from rich.progress import BarColumn, Progress as Bar, TextColumn, TimeElapsedColumn
from rich.table import Table

from tunelab.engine import Progress, format_duration

# Piped output (files, CI logs) gets room for the tables instead of the 80-column fallback.
_PIPE_WIDTH = None if sys.stdout.isatty() or os.environ.get("COLUMNS") else 140
# NO_COLOR (no-color.org) asks for plain output: no colour, and here no bold or dim either, since a
# terminal that cannot show colour usually shows escape codes for those as junk too.
def _console(stderr: bool, width: int | None) -> Console:
    if os.environ.get("NO_COLOR"):
        return Console(stderr=stderr, highlight=False, soft_wrap=True, width=width, color_system=None)
    return Console(stderr=stderr, highlight=False, soft_wrap=True, width=width)


out = _console(False, _PIPE_WIDTH)
err = _console(True, None)


def fmt(value: float | None, digits: int = 4) -> str:
    return "-" if value is None else f"{value:.{digits}f}"


def emit_json(data: Any) -> None:
    sys.stdout.write(json.dumps(data, indent=2, default=str) + "\n")


class LiveProgress:
    """A one-line progress bar on stderr: elapsed / budget, trials by state, best so far."""

    def __init__(self, metric: str, enabled: bool) -> None:
        self.metric = metric
        self.enabled = enabled
        self.bar: Bar | None = None
        self.task: Any = None

    def start(self, box_seconds: float | None, trials_cap: int | None) -> None:
        if not self.enabled:
            return
        self.bar = Bar(TextColumn("[bold]searching"), BarColumn(bar_width=24), TimeElapsedColumn(),
                       TextColumn("{task.fields[line]}"), console=err, transient=False)
        total = box_seconds if box_seconds is not None else float(trials_cap or 1)
        self.by_time = box_seconds is not None
        self.task = self.bar.add_task("search", total=total, line="starting")
        self.bar.start()

    def update(self, p: Progress) -> None:
        if self.bar is None:
            return
        c = p.counts
        line = (f"of {format_duration(p.box_seconds) if p.box_seconds else '-'} · trials {p.trials} "
                f"({c.get('pruned', 0)} pruned, {c.get('failed', 0)} failed) · best {self.metric} {fmt(p.best)}")
        completed = None if self.by_time else p.trials
        self.bar.update(self.task, line=line, completed=completed)  # None leaves the bar's count as it is

    def tick(self, elapsed: float) -> None:
        if self.bar is not None and self.by_time:
            self.bar.update(self.task, completed=elapsed)

    def stop(self) -> None:
        if self.bar is not None:
            self.bar.stop()
            self.bar = None


class RefitProgress:
    """export's refit, when it will take a while: a line saying what and how long, then elapsed against that."""

    def __init__(self, enabled: bool) -> None:
        self.enabled = enabled
        self.bar: Bar | None = None
        self._stop = threading.Event()

    def start(self, refit: Any) -> None:
        if not self.enabled or not refit.worth_announcing:
            return
        trials = ", ".join(str(n) for n in refit.trials)
        what = f"trial {trials}" if len(refit.trials) == 1 else f"an ensemble of trials {trials}"
        err.print(f"refitting {what} on {refit.rows_words}: about {format_duration(refit.expected_seconds)} "
                  "(from the trial's own fold fits)")
        self.bar = Bar(TextColumn("[bold]refitting"), BarColumn(bar_width=24), TimeElapsedColumn(),
                       TextColumn(f"of about {format_duration(refit.expected_seconds)}"), console=err,
                       transient=True)
        task = self.bar.add_task("refit", total=refit.expected_seconds)
        self.bar.start()
        began = time.monotonic()
        bar = self.bar

        def tick() -> None:
            while not self._stop.wait(0.5):
                # the bar stops short of the end until the fit is really done
                bar.update(task, completed=min(time.monotonic() - began, 0.99 * refit.expected_seconds))

        threading.Thread(target=tick, daemon=True).start()

    def stop(self) -> None:
        self._stop.set()
        if self.bar is not None:
            self.bar.stop()
            self.bar = None


def config_table(config: dict[str, Any], title: str = "best configuration") -> Table:
    table = Table(title=title, title_justify="left", show_header=True, header_style="bold")
    table.add_column("parameter")
    table.add_column("value", justify="right")
    for key, value in config.items():
        table.add_row(key, f"{value:.4g}" if isinstance(value, float) else str(value))
    return table


def _counts(c: dict[str, int]) -> str:
    parts = [f"{c.get('complete', 0)} complete"]
    for key in ("pruned", "failed", "interrupted", "running"):
        if c.get(key):
            parts.append(f"{c[key]} {key}")
    return ", ".join(parts)


def _budget(spent: float, box: float | None, trials_cap: int | None) -> str:
    text = format_duration(spent) + (f" / {format_duration(box)}" if box else "")
    return text + (f" · cap {trials_cap} trials" if trials_cap else "")


def _add_columns(table: Table, *columns: tuple[str, JustifyMethod]) -> None:
    for name, justify in columns:
        table.add_column(name, justify=justify)


def study_list_table(lines: list[Any]) -> Table:
    table = Table(show_header=True, header_style="bold", title_justify="left")
    _add_columns(table, ("study", "left"), ("task", "left"), ("metric", "left"), ("best", "right"),
                 ("trials", "left"), ("time used", "right"), ("last activity (UTC)", "left"))
    for line in lines:
        table.add_row(line.name, line.task, line.metric, fmt(line.best), _counts(line.counts),
                      _budget(line.wall_spent, line.wall_budget, line.trials_budget), line.last_activity[:19])
    if not lines:
        table.caption = "no studies yet: start one with `tunelab run DATA --target COL`"
    return table


def print_detail(d: Any) -> None:
    line = d.line
    out.print(f"[bold]{line.name}[/bold] · {line.task} · target {d.target} · {line.metric} ({line.direction}) · "
              f"seed {d.seed}")
    out.print(f"data: {d.data_path}")
    out.print(f"trials: {_counts(line.counts)}")
    cpu = format_duration(d.cpu_spent) + (f" / {format_duration(d.cpu_budget)}" if d.cpu_budget else "")
    left = f", {format_duration(d.wall_left)} left" if d.wall_left is not None else ""
    out.print(f"budget: time {_budget(line.wall_spent, line.wall_budget, line.trials_budget)}{left}; CPU {cpu}")
    if d.families:
        kept = [f for f in d.families if f not in d.dropped]
        dropped = f" (dropped: {', '.join(d.dropped)})" if d.dropped else ""
        out.print(f"search: {', '.join(kept)}{dropped}; pruning {d.pruning}")
    if d.row_ladder:
        out.print(f"rows: {d.row_ladder}")
    if d.best_trial is not None:
        b = d.best_trial
        spread = f" ± {b.fold_std:.4f} across folds" if b.fold_std is not None else ""
        out.print(f"best: {line.metric} {b.value:.4f}{spread} (trial {b.number}, {b.family or 'model'})")
        out.print(config_table(b.params))
    else:
        out.print("best: no finished trial yet")
    if d.top:
        table = Table(title=f"top {len(d.top)} trials", title_justify="left", header_style="bold")
        _add_columns(table, ("trial", "right"), (line.metric, "right"), ("± folds", "right"),
                     ("family", "left"), ("seconds", "right"), ("origin", "left"))
        for t in d.top:
            table.add_row(str(t.number), fmt(t.value), fmt(t.fold_std), t.family, fmt(t.duration, 1), t.origin)
        out.print(table)
    if len(d.phases) > 1:
        table = Table(title="phases", title_justify="left", header_style="bold")
        for name in ("phase", "from trial", "created (UTC)", "why"):
            table.add_column(name)
        for p in d.phases:
            table.add_row(str(p["phase"]), str(p["first_trial"]), p["created"][:19], p["reason"])
        out.print(table)
    if d.runners_up:
        out.print(f"runners-up: {d.runners_up}")
    if d.predictions_kept.get("trials"):
        kept = d.predictions_kept
        out.print(f"held-out predictions kept for {kept['trials']} trials ({kept['bytes'] / 1e6:.1f} MB)"
                  + (f"; {d.ensemble}" if d.ensemble else ""))
    drops = [v for v in d.decisions if v["action"] == "drop"]
    for v in drops:
        out.print(f"drop {v['family']}: {v['reason']}")
    if d.forecast_line:
        out.print(f"outlook: {d.forecast_line}")
    active = [w for w in d.workers if w["state"] == "running"]
    if active:
        table = Table(title="active workers", title_justify="left", header_style="bold")
        for name in ("host", "pid", "last heartbeat (UTC)", "trials done"):
            table.add_column(name)
        for w in active:
            table.add_row(w["host"], str(w["pid"]), w["last_heartbeat"][:19], str(w["trials_done"]))
        out.print(table)


def family_table(verdicts: Any, metric: str) -> Table:
    """One row per model family: its decision and why."""
    table = Table(title="model families", title_justify="left", header_style="bold")
    _add_columns(table, ("family", "left"), ("decision", "left"), (f"behind the leader ({metric})", "right"),
                 ("why", "left"))
    for v in verdicts:
        style = {"drop": "dim", "leads": "bold"}.get(v.action, "")
        table.add_row(v.family, v.verdict, fmt(v.gap), v.reason, style=style)
    return table


def print_importance(record: Any, decisions: Any) -> None:
    if decisions.families:
        out.print(family_table(decisions.families, record.metric))
    report = decisions.importance
    if report is None:
        out.print(f"parameters: {decisions.importance_note}")
    else:
        table = Table(title=f"what mattered in {record.name} ({record.metric}, {report.method})",
                      title_justify="left", header_style="bold")
        _add_columns(table, ("parameter", "left"), ("judged in", "left"), ("share", "right"),
                     ("80% interval", "right"), ("moves score by", "right"), ("best value", "right"),
                     ("verdict", "left"))
        for row in report.rows:
            interval = "-" if row.low is None else f"{row.low:.2f}–{row.high:.2f}"
            best = row.best_value
            best_text = "-" if best is None else (f"{best:.4g}" if isinstance(best, float) else str(best))
            style = {"keep tuning": "bold", "no measurable effect": "dim", "family dropped": "dim"}.get(row.action, "")
            table.add_row(row.param, row.family or "all trials", fmt(row.importance, 2), interval, fmt(row.spread),
                          best_text, row.verdict, style=style)
        out.print(table)
        undecided = [row for row in report.rows if row.action == "undecided"]
        for row in undecided:
            out.print(f"undecided: {row.param}: {row.reason}")
        for note in report.notes:
            out.print(f"note: {note}")
    out.print(f"outlook: {decisions.forecast_line()}")
    firm = decisions.firm()
    if firm:
        out.print(f"act on it: tunelab freeze {record.name} --auto   "
                  f"({len(firm)} decision{'s' if len(firm) > 1 else ''})")


def print_export(result: Any) -> None:
    """What was shipped: the trial (and by which rule) or the ensemble's members, scores and costs."""
    speed = (f"; predicts 1,000 rows in {result.predict_ms_per_1000:.0f} ms; "
             f"refit {format_duration(result.refit_seconds)}")
    if result.members:
        plan = result.plan
        out.print(f"wrote {result.path}: an ensemble of {len(result.members)} trials, cross-fitted {result.metric} "
                  f"{plan['score']:.4f} against {plan['single']:.4f} for the best single trial "
                  f"(fold noise {plan['noise']:.2g}), refitted on {result.rows_words}{speed}; "
                  f"sha256 {result.sha256[:16]}…")
        for member in result.members:
            out.print(f"  trial {member['trial']}: weight {member['weight']:.2f}")
        return
    rule = {"best": "the best", "one-se": "the cheapest within one standard error of the best",
            "trial": "as asked"}[result.chosen_by]
    out.print(f"wrote {result.path}: trial {result.trial} ({result.family}, {rule}), cross-validated "
              f"{result.metric} {result.score:.4f}, refitted on {result.rows_words}{speed}; "
              f"sha256 {result.sha256[:16]}…")
    if result.plan is not None:
        gain, noise = result.plan["gain"], result.plan["noise"]
        verdict = ("ship it with --ensemble" if result.plan["worth_it"] else  # export's own default rule
                   "within fold noise, not worth it" if gain > 0 else "not worth it")
        out.print(f"an ensemble would have added {gain:+.4g} (fold noise {noise:.2g}): {verdict}")


def print_first_look(study: str, decisions: Any) -> None:
    """After a launch: the decisions already firm, one line each, the forecast, and where the rest is."""
    firm = decisions.firm()
    if firm:
        out.print("decided so far:")
        for line in firm:
            out.print(f"  {line}")
    else:
        out.print("decided so far: nothing yet")
    out.print(f"outlook: {decisions.forecast_line()}")
    out.print(f"the whole table: tunelab importance {study}")


def _range(spec: dict[str, Any]) -> str:
    kind = spec["kind"]
    if kind in ("float", "int"):
        scale = ", log" if spec.get("log") else ""
        return f"{spec['low']:g} … {spec['high']:g}{scale}"
    if kind == "categorical":
        return " | ".join(map(str, spec["choices"]))
    return f"= {spec['value']}"


def print_profile(report: Any) -> None:
    out.print(f"[bold]{report.path}[/bold] · target {report.target} · {report.task} · {report.n_rows} rows · "
              f"profiled in {report.seconds:.1f}s")
    for note in report.notes:
        out.print(f"note: {note}")
    table = Table(title="columns", title_justify="left", header_style="bold")
    _add_columns(table, ("column", "left"), ("role", "left"), ("distinct", "right"), ("missing", "right"),
                 ("treatment", "left"))
    for c in report.columns:
        role = c.role + (f" ({c.mean_tokens:.1f} words)" if c.mean_tokens else "")
        table.add_row(c.name, role, str(c.n_unique), f"{c.missing_share:.0%}", c.treatment)
    out.print(table)
    meta = report.meta.to_dict()
    for group, values in meta.items():
        if not isinstance(values, dict):
            continue
        parts = []
        for key, value in values.items():
            if isinstance(value, float):
                parts.append(f"{key} {value:.3g}")
            elif isinstance(value, (int, str)) or value is None:
                parts.append(f"{key} {value if value is not None else '-'}")
        if parts:
            out.print(f"[bold]{group}[/bold]: " + " · ".join(parts))
    space = report.space.to_dict()
    table = Table(title="search space", title_justify="left", header_style="bold")
    for name in ("parameter", "range", "why"):
        table.add_column(name)
    if space.get("family_reason"):
        table.add_row("family", " | ".join(space["families"]), space["family_reason"])
    for name, spec in space["params"].items():
        table.add_row(name, _range(spec), spec.get("reason", ""))
    for family, fspec in space["families"].items():
        table.add_row(f"[bold]{family}[/bold]", "", fspec.get("reason", ""))
        for name, spec in fspec["params"].items():
            table.add_row(f"  {family}.{name}", _range(spec), spec.get("reason", ""))
    out.print(table)
    for note in space.get("notes", []):
        out.print(f"• {note}")
    if report.portfolio:
        tried = ", ".join(f"{name} ({config.get('family', '')})" for name, config in report.portfolio)
        out.print(f"run tries first {len(report.portfolio)} configurations of the portfolio: {tried}")
    if report.expected_trials is not None:
        box = format_duration(report.budget_seconds) if report.budget_seconds else "the reference 10m"
        out.print(f"about {report.expected_trials:.0f} trials expected in {box} with {report.workers} "
                  f"worker{'s' if report.workers != 1 else ''} (--jobs)")


def print_similar(similar: list[Any], task: str) -> None:
    """The earlier studies whose data looks most like this file (``run --learn-nearest``'s picks)."""
    if not similar:
        return
    listed = ", ".join(f"{n.study} ({n.distance:.2f})" for n in similar)
    out.print(f"earlier {task} studies like this data, by meta-feature distance (0 = alike): {listed}; "
              f"learn from them with `run --learn-nearest {len(similar)}` or `--learn-from NAME`")
