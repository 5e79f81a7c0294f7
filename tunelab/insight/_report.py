"""One study as one self-contained HTML file, to open in a browser or attach to a message.

Pure functions over plain values (no database, no clock): :func:`render_report` turns a
:class:`ReportData` into the page, :func:`trial_chart` draws the score-by-trial chart as inline
SVG, :func:`space_reasons` lists why the search space looks as it does. The page has no
scripts, no links to anything outside itself, and inline CSS only, so it reads the same
offline, in a mail client's preview, or printed. Every string that came from a user (study
name, paths, parameter values, reasons) goes through :func:`html.escape`.
"""

from __future__ import annotations

import html
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, Literal

from tunelab.values import format_duration

if TYPE_CHECKING:  # types only: the page is built from plain values
    from tunelab.insight._families import FamilyVerdict
    from tunelab.insight._importance import ImportanceReport
    from tunelab.space import SpaceSpec

Direction = Literal["maximize", "minimize"]

GENERATOR = "tunelab report"
"""Content of the page's ``generator`` meta tag: marks a file this module wrote (safe to overwrite)."""

_STATES = ("complete", "pruned", "failed", "interrupted")
_INK = "#1d3b4a"  # complete trials
_HOLLOW = "#1d3b4a"  # pruned trials: same ink, no fill
_BEST = "#b5651d"  # best-so-far line and the best trial's ring
_GRID = "#dde3e6"
_TITLES_UP_TO = 2000  # per-point hover titles; beyond this they only bloat the file


@dataclass(frozen=True)
class ChartPoint:
    """One finished trial on the chart: ``pruned`` ones carry the score at the step they stopped."""

    number: int
    value: float
    state: Literal["complete", "pruned"]


@dataclass(frozen=True)
class FamilyLine:
    """How one model family fared: trials that ran, how many completed, its best score."""

    family: str
    trials: int
    complete: int
    pruned: int
    best: float | None
    best_trial: int | None


@dataclass(frozen=True)
class Reason:
    """One decision of the search space and why it was made; ``children`` nest under it."""

    subject: str
    text: str
    children: tuple[Reason, ...] = ()
    fold: bool = False  # children behind a click (a family's parameter ranges), so the list stays short


@dataclass(frozen=True)
class BestTrial:
    """The best complete trial: its score, spread across folds, and full configuration."""

    number: int
    value: float
    fold_std: float | None
    family: str
    config: Mapping[str, Any]


@dataclass(frozen=True)
class ReportData:
    """Everything the page shows, as plain values (the ops layer reads them from the store).

    Times are UTC ISO strings as the store keeps them; durations are seconds.
    """

    study: str
    data_path: str
    target: str
    task: str
    metric: str
    direction: Direction
    seed: int
    created_at: str
    first_start: str | None
    last_activity: str | None
    launches: int
    wall_spent: float
    wall_budget: float | None
    cpu_spent: float
    cpu_budget: float | None
    trials_cap: int | None
    counts: Mapping[str, int]
    best: BestTrial | None
    points: Sequence[ChartPoint]
    families: Sequence[FamilyLine]
    importance: ImportanceReport | None
    importance_note: str
    reasons: Sequence[Reason]
    phases: Sequence[tuple[int, int, str]] = field(default_factory=tuple)  # (phase, first trial, why)
    written_at: str = ""
    family_verdicts: Sequence[FamilyVerdict] = field(default_factory=tuple)
    forecast: str = ""  # what another stretch of search is likely to buy, in one line
    ensemble: str = ""  # what an ensemble of the best trials would add, cross-fitted


# ------------------------------------------------------------------------------------ page


def render_report(data: ReportData) -> str:
    """The whole page as one string: header facts, best trial, chart, families, importance, reasons."""
    parts = [
        "<!DOCTYPE html>",
        '<html lang="en">',
        "<head>",
        '<meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f'<meta name="generator" content="{GENERATOR}">',
        f"<title>Study {_e(data.study)}: search report</title>",
        f"<style>{_CSS}</style>",
        "</head>",
        "<body>",
        f"<h1>Study {_e(data.study)}</h1>",
        f'<p class="lead">{_e(_lead(data))}</p>',
        _facts(data),
        '<h2 id="best">Best trial</h2>',
        _best(data),
        '<h2 id="chart">Score by trial</h2>',
        trial_chart(data.points, direction=data.direction, metric=data.metric),
        _chart_caption(data),
        '<h2 id="families">Model families</h2>',
        _families(data),
        '<h2 id="outlook">Is more search worth it?</h2>',
        f'<p>{_e(data.forecast)}</p>' if data.forecast else '<p class="quiet">No forecast.</p>',
        f'<p>{_e(data.ensemble[:1].upper() + data.ensemble[1:])}.</p>' if data.ensemble else "",
        '<h2 id="importance">Which parameters mattered</h2>',
        _importance(data),
        '<h2 id="space">Why the search space looks like this</h2>',
        _reasons(data),
        _footer(data),
        "</body>",
        "</html>",
    ]
    return "\n".join(p for p in parts if p) + "\n"


_CSS = """
body{font:15px/1.5 system-ui,sans-serif;color:#222;background:#fff;max-width:62rem;margin:1.5rem auto;padding:0 1rem}
h1{font-size:1.45rem;margin:0 0 .2rem}
h2{font-size:1.1rem;margin:2rem 0 .5rem;padding-bottom:.15rem;border-bottom:2px solid #e4e0d8}
.lead{margin:0 0 1rem;color:#444}
dl.facts{display:grid;grid-template-columns:max-content 1fr;gap:.2rem 1.2rem;margin:0}
dl.facts dt{color:#5a5a5a}
dl.facts dd{margin:0;overflow-wrap:anywhere}
table{border-collapse:collapse;margin:.4rem 0}
th,td{padding:.22rem .7rem .22rem 0;text-align:left;vertical-align:top;border-bottom:1px solid #ebe8e2}
th{font-weight:600;border-bottom:1px solid #bbb}
.num{text-align:right;font-variant-numeric:tabular-nums}
.quiet{color:#666}
.keep{font-weight:600}
.note{color:#5a4a1a;background:#faf6ea;padding:.35rem .6rem;border-left:3px solid #d8c48a}
ul.reasons{padding-left:1.2rem}
ul.reasons li{margin:.15rem 0}
ul.reasons ul{padding-left:1.1rem}
.subject{font-weight:600}
summary{cursor:pointer;color:#555;font-size:.9rem}
.legend{font-size:.9rem;color:#444}
.legend svg{vertical-align:middle;margin:0 .25rem 0 .8rem}
svg.chart{max-width:100%;height:auto}
footer{margin-top:2.5rem;font-size:.85rem;color:#777}
@media print{body{margin:0;max-width:none}h2{break-after:avoid}}
""".strip()


def _lead(d: ReportData) -> str:
    better = "higher" if d.direction == "maximize" else "lower"
    target = f", predicting {d.target}" if d.target else ""
    return f"{d.task}{target}; scored by {d.metric} ({better} is better)"


def _facts(d: ReportData) -> str:
    c = d.counts
    total = sum(c.get(s, 0) for s in _STATES)
    states = ", ".join(f"{c.get(s, 0)} {s}" for s in _STATES)
    extra = "".join(f"; {c[s]} {words}"
                    for s, words in (("running", "running now"), ("waiting", "waiting in the queue")) if c.get(s))
    rows: list[tuple[str, str]] = [
        ("Data file", d.data_path or "-"),
        ("Target", d.target or "-"),
        ("Task", d.task),
        ("Metric", f"{d.metric} ({'higher' if d.direction == 'maximize' else 'lower'} is better)"),
        ("Seed", str(d.seed)),
        ("Time", _budget_words(d.wall_spent, d.wall_budget, "time cap")),
        ("CPU time", _budget_words(d.cpu_spent, d.cpu_budget, "CPU cap")),
        ("Trial cap", _trial_cap_words(c, d.trials_cap)),
        ("Trials", f"{total} run: {states}{extra}"),
        ("Ran", _ran_words(d)),
    ]
    if len(d.phases) > 1:
        rows.append(("Phases", f"{len(d.phases)} (the space was narrowed; see the last section)"))
    items = "".join(f"<dt>{_e(k)}</dt><dd>{_e(v)}</dd>" for k, v in rows)
    return f'<dl class="facts">{items}</dl>'


def _budget_words(spent: float, box: float | None, cap: str) -> str:
    if box is None:
        return f"{format_duration(spent)} used (no {cap})"
    left = max(0.0, box - spent)
    return f"{format_duration(spent)} used of {format_duration(box)}; {format_duration(left)} left"


def _trial_cap_words(c: Mapping[str, int], cap: int | None) -> str:
    if cap is None:
        return "none"
    finished = sum(c.get(s, 0) for s in ("complete", "pruned", "failed"))
    return f"{cap} trials; {finished} finished, {max(0, cap - finished)} left"


def _ran_words(d: ReportData) -> str:
    created = f"created {_when(d.created_at)}"
    if not d.launches or d.first_start is None:
        return created + "; never launched"
    launches = "1 launch" if d.launches == 1 else f"{d.launches} launches"
    last = _when(d.last_activity) if d.last_activity else "?"
    return f"{created}; {launches}, from {_when(d.first_start)} to {last}"


def _when(iso: str) -> str:
    """``2026-12-02T16:51:07+00:00`` → ``2026-12-02 16:51 UTC``."""
    text = iso.replace("T", " ")
    if text.endswith("+00:00"):
        text = text[:-6]
    return f"{text[:16]} UTC" if len(text) >= 16 else text


def _best(d: ReportData) -> str:
    b = d.best
    if b is None:
        return '<p class="quiet">No trial has completed yet, so there is no best configuration.</p>'
    spread = f" ± {_num(b.fold_std)} across folds" if b.fold_std is not None else ""
    family = f", {b.family}" if b.family else ""
    head = (f"<p><strong>{_e(d.metric)} {_e(_num(b.value))}</strong>{_e(spread)} "
            f"(trial {b.number}{_e(family)})</p>")
    rows = "".join(f'<tr><td>{_e(k)}</td><td class="num">{_e(_value(v))}</td></tr>' for k, v in b.config.items())
    table = (f'<table class="config"><thead><tr><th>parameter</th><th class="num">value</th></tr></thead>'
             f"<tbody>{rows}</tbody></table>") if rows else ""
    return head + table


def _chart_caption(d: ReportData) -> str:
    if not d.points:
        return ""
    swatch = ('<svg width="14" height="14" viewBox="0 0 14 14" aria-hidden="true">{}</svg>')
    dot = swatch.format(f'<circle cx="7" cy="7" r="4" fill="{_INK}"/>')
    ring = swatch.format(f'<circle cx="7" cy="7" r="4" fill="#fff" stroke="{_HOLLOW}" stroke-width="1.4"/>')
    line = swatch.format(f'<line x1="0" y1="7" x2="14" y2="7" stroke="{_BEST}" stroke-width="2"/>')
    missing = d.counts.get("failed", 0) + d.counts.get("interrupted", 0)
    tail = (f" {missing} failed or interrupted trial{'s have' if missing != 1 else ' has'} no score and "
            f"{'are' if missing != 1 else 'is'} not drawn.") if missing else ""
    up = "higher" if d.direction == "maximize" else "lower"
    scores = [p.value for p in d.points if math.isfinite(p.value)]
    off = beyond_window(scores, d.direction) if scores else 0
    if off:
        tail = (f" {off} trial{'s' if off != 1 else ''} scored far worse than the rest and "
                f"{'sit' if off != 1 else 'sits'} on the chart's lower edge (hover for the score).{tail}")
    return (f'<p class="legend">{dot}complete{ring}pruned (its score when it was stopped){line}best so far'
            f"</p><p class=\"quiet\">Better scores are drawn higher ({_e(d.metric)}: {up} is better)."
            f"{_e(tail)}</p>")


def _families(d: ReportData) -> str:
    if not d.families:
        return '<p class="quiet">This search space has no model families to compare.</p>'
    verdicts = {v.family: v for v in d.family_verdicts}
    head = ("<tr><th>family</th><th class=\"num\">trials</th><th class=\"num\">complete</th>"
            f"<th class=\"num\">pruned</th><th class=\"num\">best {_e(d.metric)}</th><th class=\"num\">in trial</th>"
            "<th>decision</th><th>why</th></tr>")
    body = []
    for f in d.families:
        v = verdicts.get(f.family)
        cls = {"drop": ' class="quiet"', "leads": ' class="keep"'}.get(v.action if v else "", "")
        body.append(
            f"<tr{cls}><td>{_e(f.family)}</td><td class=\"num\">{f.trials}</td><td class=\"num\">{f.complete}</td>"
            f"<td class=\"num\">{f.pruned}</td><td class=\"num\">{_e(_num(f.best))}</td>"
            f"<td class=\"num\">{'-' if f.best_trial is None else f.best_trial}</td>"
            f"<td>{_e(v.verdict if v else '-')}</td><td>{_e(v.reason if v else '')}</td></tr>")
    return f"<table><thead>{head}</thead><tbody>{''.join(body)}</tbody></table>"


def _importance(d: ReportData) -> str:
    note = f'<p class="note">{_e(d.importance_note)}</p>' if d.importance_note else ""
    report = d.importance
    if report is None:
        return note
    head = ("<tr><th>parameter</th><th>judged in</th><th class=\"num\">share</th><th class=\"num\">80% interval</th>"
            "<th class=\"num\">moves score by</th><th class=\"num\">best value</th><th>verdict</th></tr>")
    body = []
    for r in report.rows:
        interval = "-" if r.low is None or r.high is None else f"{r.low:.2f} to {r.high:.2f}"
        cls = {"keep tuning": ' class="keep"', "no measurable effect": ' class="quiet"',
               "family dropped": ' class="quiet"'}.get(r.action, "")
        body.append(
            f"<tr{cls}><td>{_e(r.param)}</td><td>{_e(r.family or 'all trials')}</td>"
            f"<td class=\"num\">{_e(_fixed(r.importance, 2))}</td><td class=\"num\">{_e(interval)}</td>"
            f"<td class=\"num\">{_e(_num(r.spread))}</td><td class=\"num\">{_e(_value(r.best_value))}</td>"
            f"<td title=\"{_e(r.reason)}\">{_e(r.verdict)}</td></tr>"
        )
    how = ("Share: the part of the score's variance a parameter explains on its own, with an 80% interval "
           f"from resampling the trials ({report.method}). Hover a verdict for its reason; an undecided one "
           "says how many more trials would decide it.")
    return (f"<table><thead>{head}</thead><tbody>{''.join(body)}</tbody></table>"
            f'<p class="quiet">{_e(how)}</p>{note}')


def _reasons(d: ReportData) -> str:
    if not d.reasons and len(d.phases) <= 1:
        return '<p class="quiet">The stored search space gives no reasons.</p>'
    out = _reason_list(d.reasons) if d.reasons else ""
    if len(d.phases) > 1:
        items = "".join(f"<li><span class=\"subject\">phase {n}</span> (from trial {first}): {_e(why)}</li>"
                        for n, first, why in d.phases)
        out += (f"<p>The space changed during the study; reasons above are for the last phase.</p>"
                f"<ul class=\"reasons\">{items}</ul>")
    return out


def _reason_list(reasons: Sequence[Reason]) -> str:
    items = []
    for r in reasons:
        inner = _reason_list(r.children) if r.children else ""
        if inner and r.fold:
            word = "reason" if len(r.children) == 1 else "reasons"
            inner = f"<details><summary>{len(r.children)} parameter {word}</summary>{inner}</details>"
        if r.subject:
            text = f": {_e(r.text)}" if r.text else ""
            items.append(f"<li><span class=\"subject\">{_e(r.subject)}</span>{text}{inner}</li>")
        else:
            items.append(f"<li>{_e(r.text)}{inner}</li>")
    return f"<ul class=\"reasons\">{''.join(items)}</ul>"


def _footer(d: ReportData) -> str:
    when = f" on {_e(_when(d.written_at))}" if d.written_at else ""
    caveat = "" if d.task == "objective" else (" The scores are cross-validated estimates on the study's data, "
                                                "not guarantees.")
    return f"<footer>Written by <code>tunelab report {_e(d.study)}</code>{when}.{caveat}</footer>"


# ------------------------------------------------------------------------------------ chart


def best_so_far(points: Sequence[ChartPoint], direction: Direction) -> list[tuple[int, float]]:
    """(trial number, best complete score up to it) at each complete trial, in trial order.

    Pruned trials are left out: their score is from part of the folds, so it is not comparable
    with a complete trial's.
    """
    better = (lambda a, b: a > b) if direction == "maximize" else (lambda a, b: a < b)
    out: list[tuple[int, float]] = []
    best: float | None = None
    for p in sorted(points, key=lambda p: p.number):
        if p.state != "complete" or not math.isfinite(p.value):
            continue
        if best is None or better(p.value, best):
            best = p.value
        out.append((p.number, best))
    return out


def trial_chart(points: Sequence[ChartPoint], *, direction: Direction, metric: str,
                width: int = 720, height: int = 300) -> str:
    """Every finished trial's score over its number, as inline SVG; better scores are drawn higher.

    Complete trials are filled dots, pruned ones hollow, and a step line follows the best complete
    score so far. For a metric to minimise the value axis runs downwards, so "up" always means
    "better" whatever the metric.
    """
    finite = [p for p in points if math.isfinite(p.value)]
    if not finite:
        return '<p class="quiet">No trial has a score yet, so there is nothing to draw.</p>'
    left, right, top, bottom = 70, 18, 14, 40
    pw, ph = width - left - right, height - top - bottom

    first_n, last_n = min(p.number for p in finite), max(p.number for p in finite)
    x_pad = max(0.5, 0.015 * (last_n - first_n))  # keeps the first and last dots off the frame
    x_lo, x_hi = first_n - x_pad, last_n + x_pad
    y_lo, y_hi = value_window([p.value for p in finite], direction)
    pad = (y_hi - y_lo) * 0.06 if y_hi > y_lo else (abs(y_lo) * 0.05 or 0.5)
    edge = y_lo if direction == "maximize" else y_hi  # the worse edge; scores beyond it sit on it
    y_lo, y_hi = y_lo - pad, y_hi + pad

    def px(n: float) -> float:
        return left + (n - x_lo) / (x_hi - x_lo) * pw

    def py(v: float) -> float:
        v = max(v, edge) if direction == "maximize" else min(v, edge)
        share = (y_hi - v) if direction == "maximize" else (v - y_lo)
        return top + share / (y_hi - y_lo) * ph

    svg = [f'<svg class="chart" width="{width}" height="{height}" viewBox="0 0 {width} {height}" role="img" '
           f'aria-label="{_e(metric)} of every finished trial by trial number" '
           'font-family="system-ui,sans-serif" font-size="11">']
    for v in nice_ticks(y_lo, y_hi):
        y = py(v)
        svg.append(f'<line x1="{left}" y1="{y:.1f}" x2="{left + pw}" y2="{y:.1f}" stroke="{_GRID}"/>')
        svg.append(f'<text x="{left - 6}" y="{y + 4:.1f}" text-anchor="end" fill="#555">{_e(_tick(v))}</text>')
    for n in nice_ticks(first_n, last_n, integers=True) if last_n > first_n else [first_n]:
        x = px(n)
        svg.append(f'<line x1="{x:.1f}" y1="{top + ph}" x2="{x:.1f}" y2="{top + ph + 4}" stroke="#888"/>')
        svg.append(f'<text x="{x:.1f}" y="{top + ph + 16}" text-anchor="middle" fill="#555">{int(n)}</text>')
    svg.append(f'<rect x="{left}" y="{top}" width="{pw}" height="{ph}" fill="none" stroke="#aaa"/>')
    svg.append(f'<text x="{left + pw / 2:.1f}" y="{height - 6}" text-anchor="middle" fill="#333">trial number</text>')
    arrow = "better \u2191"
    svg.append(f'<text transform="translate(14 {top + ph / 2:.1f}) rotate(-90)" text-anchor="middle" '
               f'fill="#333">{_e(metric)} ({_e(arrow)})</text>')

    steps = best_so_far(finite, direction)
    if steps:
        coords: list[str] = []
        last: float | None = None
        for n, v in steps:
            if last is not None and v != last:
                coords.append(f"{px(n):.1f},{py(last):.1f}")
            coords.append(f"{px(n):.1f},{py(v):.1f}")
            last = v
        coords.append(f"{px(last_n):.1f},{py(steps[-1][1]):.1f}")
        svg.append(f'<polyline points="{" ".join(coords)}" fill="none" stroke="{_BEST}" stroke-width="2"/>')

    radius = 3.5 if len(finite) <= 400 else 2.2
    titled = len(finite) <= _TITLES_UP_TO
    for p in sorted(finite, key=lambda p: (p.state == "complete", p.number)):  # complete ones on top
        paint = (f'fill="{_INK}"' if p.state == "complete"
                 else f'fill="#fff" stroke="{_HOLLOW}" stroke-width="1.3"')
        title = f"<title>trial {p.number}, {_e(p.state)}: {_e(_num(p.value))}</title>" if titled else ""
        svg.append(f'<circle cx="{px(p.number):.1f}" cy="{py(p.value):.1f}" r="{radius}" {paint}>{title}</circle>'
                   if title else f'<circle cx="{px(p.number):.1f}" cy="{py(p.value):.1f}" r="{radius}" {paint}/>')
    if steps:
        best_n, best_v = steps[-1]
        first = next(n for n, v in steps if v == best_v)
        svg.append(f'<circle cx="{px(first):.1f}" cy="{py(best_v):.1f}" r="{radius + 3.5}" fill="none" '
                   f'stroke="{_BEST}" stroke-width="1.8"><title>best: trial {first}</title></circle>')
    svg.append("</svg>")
    return "".join(svg)


def value_window(values: Sequence[float], direction: Direction) -> tuple[float, float]:
    """The score range the chart shows: every better score, worse ones up to Tukey's far fence.

    One diverged model (a log loss of 20 beside scores near 0.4) would otherwise squash every
    other trial into a line; scores beyond the fence, q3 + 3 IQR on the worse side (Tukey 1977,
    "Exploratory Data Analysis"), are drawn on the chart's edge instead.
    """
    ordered = sorted(values)
    lo, hi = ordered[0], ordered[-1]
    q1, q3 = _quantile(ordered, 0.25), _quantile(ordered, 0.75)
    reach = 3 * (q3 - q1)
    if direction == "maximize":
        return max(lo, q1 - reach), hi
    return lo, min(hi, q3 + reach)


def beyond_window(values: Sequence[float], direction: Direction) -> int:
    """How many scores lie beyond :func:`value_window` (drawn on its edge)."""
    lo, hi = value_window(values, direction)
    return sum(v < lo or v > hi for v in values)


def _quantile(ordered: Sequence[float], q: float) -> float:
    at = q * (len(ordered) - 1)
    low = math.floor(at)
    high = min(low + 1, len(ordered) - 1)
    return ordered[low] + (ordered[high] - ordered[low]) * (at - low)


def nice_ticks(lo: float, hi: float, count: int = 5, *, integers: bool = False) -> list[float]:
    """About ``count`` round tick values (steps of 1, 2, 2.5 or 5 times a power of ten) inside [lo, hi]."""
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi <= lo:
        return [lo] if math.isfinite(lo) else []
    raw = (hi - lo) / max(1, count)
    magnitude = 10 ** math.floor(math.log10(raw))
    step = next(m * magnitude for m in (1, 2, 2.5, 5, 10) if m * magnitude >= raw)
    if integers:
        step = max(1.0, float(math.ceil(step)))
    first = math.ceil(lo / step - 1e-9)
    ticks = []
    k = first
    while k * step <= hi + step * 1e-9:
        ticks.append(k * step)
        k += 1
    return ticks


# ------------------------------------------------------------------------------------ space


def space_reasons(space: SpaceSpec) -> list[Reason]:
    """The space's decisions with their reasons: which families and why, each family's ranges, shared knobs, notes.

    Decisions without a reason are left out, except families, which always appear so the
    list shows what was searched.
    """
    out: list[Reason] = []
    if space.families:
        kids = []
        for name, fam in space.families.items():
            inner = tuple(Reason(f"{name}.{p}", s.reason) for p, s in fam.params.items() if s.reason)
            kids.append(Reason(name, fam.reason, inner, fold=True))
        out.append(Reason("model families searched", space.family_reason, tuple(kids)))
    shared = tuple(Reason(name, spec.reason) for name, spec in space.params.items() if spec.reason)
    if shared:
        out.append(Reason("shared parameters", "", shared))
    if space.notes:
        out.append(Reason("notes", "", tuple(Reason("", n) for n in space.notes)))
    return out


# ------------------------------------------------------------------------------------ words


def _e(value: Any) -> str:
    return html.escape(str(value), quote=True)


def _num(value: float | None) -> str:
    if value is None:
        return "-"
    if not math.isfinite(value):
        return str(value)
    if value != 0 and (abs(value) >= 1e5 or abs(value) < 1e-3):
        return f"{value:.4g}"
    return f"{value:.4f}"


def _fixed(value: float | None, digits: int) -> str:
    return "-" if value is None else f"{value:.{digits}f}"


def _tick(value: float) -> str:
    return f"{value:.6g}"


def _value(value: Any) -> str:
    if value is None:
        return "-"
    if hasattr(value, "item"):
        value = value.item()
    if isinstance(value, float):
        return f"{value:.4g}"
    return str(value)


__all__ = [
    "GENERATOR",
    "BestTrial",
    "ChartPoint",
    "FamilyLine",
    "Reason",
    "ReportData",
    "best_so_far",
    "nice_ticks",
    "render_report",
    "space_reasons",
    "trial_chart",
    "value_window",
]
