"""`tunelab report`: one self-contained HTML page per study, escaped, with a chart oriented by the metric."""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET
from html import escape as html_escape
from pathlib import Path

import optuna
import pytest

from conftest import digest
from tunelab.engine import Budget, FakeClock, SearchSettings, TrialResult, trial_state
from tunelab.insight import ChartPoint, best_so_far, nice_ticks, trial_chart, value_window
from tunelab.ops import (
    create_objective_study,
    default_report_path,
    freeze_parameters,
    run_objective_study,
    write_report,
)
from tunelab.space import FamilySpec, ParamSpec, SpaceSpec


def family_space(reason: str = "a wide range on purpose") -> SpaceSpec:
    return SpaceSpec(
        params={"prep.scale": ParamSpec("categorical", choices=("yes", "no"), reason="skewed columns need it")},
        families={
            "a": FamilySpec({"strong": ParamSpec("float", low=0, high=1, reason=reason),
                             "idle": ParamSpec("float", low=0, high=1)}, reason="cheap and smooth"),
            "b": FamilySpec({"k": ParamSpec("int", low=1, high=10, reason="few neighbours")},
                            reason="a different bias"),
        },
        family_reason="both families fit the budget",
        notes=("a note about the data",),
    )


def staged(clock: FakeClock):
    """Family a scores 3 * strong, family b about 1; b with k == 7 fails; three reports per trial."""

    def objective(config, report):
        if config["family"] == "b" and config["b.k"] == 7:
            raise ValueError("model exploded")
        value = 3 * config["a.strong"] if config["family"] == "a" else 1.0 + 0.01 * config["b.k"]
        for step in range(1, 4):
            clock.advance(1)
            report(step, value * step / 3)
        return TrialResult(value)

    return objective


def make_study(store: Path, name: str, trials: int, *, space: SpaceSpec | None = None, direction: str = "maximize",
               metric: str = "value") -> None:
    clock = FakeClock()
    run_objective_study(name, staged(clock), space or family_space(), Budget(trials=trials), store=str(store),
                        direction=direction, metric=metric, sampler="random", pruning="median", seed=1, clock=clock,
                        settings=SearchSettings(heartbeat_interval=None))


@pytest.fixture(scope="module")
def searched(tmp_path_factory):
    """A 40-trial two-family study (complete, pruned and failed trials) and its report, written once."""
    folder = tmp_path_factory.mktemp("report")
    store = folder / "studies.db"
    make_study(store, "fam", 40)
    out = folder / "fam.html"
    write_report("fam", store=str(store), out=out, clock=FakeClock())
    return store, out.read_text(encoding="utf-8")


def section(page: str, anchor: str) -> str:
    """The HTML between one ``<h2 id=...>`` and the next heading (or the footer)."""
    start = page.index(f'<h2 id="{anchor}">')
    ends = [i for i in (page.find("<h2", start + 1), page.find("<footer", start + 1)) if i != -1]
    return page[start:min(ends)]


def chart_circles(page: str) -> list[ET.Element]:
    svg = re.search(r'<svg class="chart".*?</svg>', page, re.S)
    assert svg is not None
    return [el for el in ET.fromstring(svg.group(0)) if el.tag == "circle"]


def trials_of(store: Path, name: str) -> list[optuna.trial.FrozenTrial]:
    return optuna.load_study(study_name=name, storage=f"sqlite:///{store}").get_trials(deepcopy=False)


# ---- the file -------------------------------------------------------------------------------------


def test_the_report_is_one_self_contained_html_file_with_no_external_references(cli, searched, tmp_path):
    store, _ = searched
    out = tmp_path / "fam.html"
    result = cli("report", "fam", "--store", str(store), "--out", str(out))
    assert result.code == 0, result.err
    assert result.out.count("\n") == 1 and str(out) in result.out
    page = out.read_text(encoding="utf-8")
    assert page.startswith("<!DOCTYPE html>") and page.rstrip().endswith("</html>")
    assert "<style>" in page and '<svg class="chart"' in page
    for outside in ("<script", "<link", "<iframe", "<img", "src=", "href=", "@import", "url(", "://"):
        assert outside not in page.lower(), outside


def test_the_default_file_is_named_after_the_study_in_the_current_folder(cli, searched, tmp_path, monkeypatch):
    store, _ = searched
    monkeypatch.chdir(tmp_path)
    result = cli("report", "fam", "--store", str(store))
    assert result.code == 0, result.err
    assert (tmp_path / "fam.report.html").exists()
    assert result.out.strip().splitlines() == [result.out.strip()] and "fam.report.html" in result.out


def test_quiet_prints_only_the_path_and_json_says_what_was_written(cli, searched, tmp_path):
    store, _ = searched
    out = tmp_path / "r.html"
    quiet = cli("report", "fam", "--store", str(store), "--out", str(out), "-q")
    assert quiet.code == 0 and quiet.out == f"{out}\n" and quiet.err == ""
    import json

    data = json.loads(cli("report", "fam", "--store", str(store), "--out", str(out), "--json").out)
    assert data["path"] == str(out) and data["study"] == "fam" and data["trials"] == 40
    assert data["bytes"] == out.stat().st_size


def test_a_study_name_with_unsafe_characters_gets_a_safe_default_file_name():
    assert default_report_path("sales q3/2026 <draft>") == Path("sales-q3-2026-draft.report.html")
    assert default_report_path("../..") == Path("study.report.html")


def test_an_earlier_report_is_replaced_but_any_other_file_is_left_alone(cli, searched, tmp_path):
    store, _ = searched
    data = tmp_path / "data.csv"
    data.write_text("a,b\n1,2\n")
    before = digest(data)
    refused = cli("report", "fam", "--store", str(store), "--out", str(data))
    assert refused.code == 2 and "not a report" in refused.err and refused.err.count("\n") == 1
    assert digest(data) == before
    out = tmp_path / "again.html"
    assert cli("report", "fam", "--store", str(store), "--out", str(out)).code == 0
    assert cli("report", "fam", "--store", str(store), "--out", str(out)).code == 0


# ---- what the page says ---------------------------------------------------------------------------


def test_the_header_gives_the_study_metric_seed_budget_counts_and_when_it_ran(searched):
    store, page = searched
    facts = page[page.index('<dl class="facts">'):page.index("</dl>")]
    counts = {s: 0 for s in ("complete", "pruned", "failed", "interrupted")}
    for t in trials_of(store, "fam"):
        counts[trial_state(t)] += 1
    assert counts["complete"] and counts["pruned"] and counts["failed"]  # the fixture exercises every drawn state
    states = ", ".join(f"{counts[s]} {s}" for s in counts)
    assert f"<dt>Trials</dt><dd>40 run: {states}</dd>" in facts
    assert "<h1>Study fam</h1>" in page
    assert "<dt>Metric</dt><dd>value (higher is better)</dd>" in facts
    assert "<dt>Seed</dt><dd>1</dd>" in facts
    assert "<dt>Trial cap</dt><dd>40 trials; 40 finished, 0 left</dd>" in facts
    assert "used (no time cap)" in facts
    assert "created 2023-11-14 22:13 UTC; 1 launch" in facts  # FakeClock starts at 1.7e9 s
    assert "on 2023-11-14 22:13 UTC" in page  # written-at comes from the injected clock


def test_the_best_trial_shows_its_value_and_whole_configuration(searched):
    store, page = searched
    best = max((t for t in trials_of(store, "fam") if trial_state(t) == "complete"), key=lambda t: t.value)
    part = section(page, "best")
    assert f"value {best.value:.4f}</strong>" in part and f"trial {best.number}, {best.params['family']})" in part
    for name in best.params:
        assert f"<td>{name}</td>" in part


def test_the_chart_draws_every_scored_trial_pruned_ones_hollow(searched):
    store, page = searched
    trials = trials_of(store, "fam")
    complete = sum(trial_state(t) == "complete" for t in trials)
    pruned = sum(trial_state(t) == "pruned" for t in trials)
    dots = [c for c in chart_circles(page) if c.find("title") is not None and "best" not in c.find("title").text]
    assert sum(c.get("fill") == "#fff" for c in dots) == pruned
    assert sum(c.get("fill") not in ("#fff", "none") for c in dots) == complete
    assert "failed or interrupted trials have no score and are not drawn" in page


def test_each_model_family_gets_its_trials_completes_and_best_value(searched):
    store, page = searched
    part = section(page, "families")
    for family in ("a", "b"):
        mine = [t for t in trials_of(store, "fam") if t.params.get("family") == family]
        done = [t.value for t in mine if trial_state(t) == "complete"]
        row = re.search(rf"<tr[^>]*><td>{family}</td>(.*?)</tr>", part)
        assert row is not None
        cells = re.findall(r'<td class="num">([^<]*)</td>', row.group(1))
        assert cells[:2] == [str(len(mine)), str(len(done))]
        assert cells[3] == f"{max(done):.4f}"


def test_the_importance_table_appears_once_there_are_enough_trials(searched):
    _, page = searched
    part = section(page, "importance")
    assert "<th>verdict</th>" in part
    for param in ("family", "prep.scale", "a.strong", "b.k"):
        assert f"<td>{param}</td>" in part


def test_the_search_space_reasons_are_listed(searched):
    _, page = searched
    part = section(page, "space")
    for reason in ("both families fit the budget", "cheap and smooth", "a different bias", "a wide range on purpose",
                   "few neighbours", "skewed columns need it", "a note about the data"):
        assert reason in part


def test_a_search_on_a_data_file_reports_its_file_target_task_and_the_space_builders_reasons(cli, small_csv, store_path,
                                                                                            tmp_path):
    assert cli("run", str(small_csv), "--target", "y", "--trials", "2", "--store", str(store_path), "--study", "s",
               "-q").code == 0
    out = tmp_path / "s.html"
    assert cli("report", "s", "--store", str(store_path), "--out", str(out)).code == 0
    page = out.read_text(encoding="utf-8")
    facts = page[page.index('<dl class="facts">'):page.index("</dl>")]
    assert f"<dt>Data file</dt><dd>{small_csv.resolve()}</dd>" in facts
    assert "<dt>Target</dt><dd>y</dd>" in facts and "<dt>Task</dt><dd>binary</dd>" in facts
    assert "<dt>Metric</dt><dd>roc_auc (higher is better)</dd>" in facts
    assert "across folds" in section(page, "best") and "cross-validated estimates" in page
    from tunelab.store import Store

    with Store.open(str(store_path)) as st:
        space = SpaceSpec.from_json(st.phases(st.get_study("s").id)[-1].space_json)
    families = section(page, "families")
    assert all(f"<td>{name}</td>" in families for name in space.families)  # tried or not
    assert html_escape(space.family_reason) in section(page, "space")


def test_too_few_trials_for_importance_is_one_plain_line_not_an_error(cli, store_path, tmp_path):
    make_study(store_path, "tiny", 5)
    out = tmp_path / "tiny.html"
    result = cli("report", "tiny", "--store", str(store_path), "--out", str(out))
    assert result.code == 0, result.err
    part = section(out.read_text(encoding="utf-8"), "importance")
    assert "<table" not in part
    assert len(re.findall(r"<p[ >]", part)) == 1 and "Too few finished trials" in part


def test_a_study_with_no_trials_yet_still_gets_a_report(cli, store_path, tmp_path):
    create_objective_study("empty", family_space(), Budget(trials=5), store=str(store_path))
    out = tmp_path / "empty.html"
    result = cli("report", "empty", "--store", str(store_path), "--out", str(out))
    assert result.code == 0, result.err
    page = out.read_text(encoding="utf-8")
    assert "No trial has completed yet" in page and "nothing to draw" in page
    assert "never launched" in page


def test_a_narrowed_space_lists_its_phases_and_why(store_path, tmp_path):
    make_study(store_path, "narrow", 5)
    freeze_parameters("narrow", {"b.k": "4"}, store=str(store_path), clock=FakeClock())
    out = tmp_path / "narrow.html"
    write_report("narrow", store=str(store_path), out=out)
    part = section(out.read_text(encoding="utf-8"), "space")
    assert "phase 2</span> (from trial 5)" in part and "froze b.k=4 (set by hand)" in part


def test_user_text_in_the_report_is_escaped(store_path, tmp_path):
    evil = "<script>alert(1)</script>"
    space = SpaceSpec(params={"x": ParamSpec("categorical", choices=("<i>a</i>", "b&c"), reason=evil)},
                      family_reason=evil, notes=(f"note {evil}",))
    name = 'study "<b>one</b>" & co'
    clock = FakeClock()
    run_objective_study(name, lambda config, report: TrialResult(float(len(config["x"]))), space, Budget(trials=4),
                        store=str(store_path), metric="<m>", sampler="random", clock=clock,
                        settings=SearchSettings(heartbeat_interval=None))
    out = tmp_path / "evil.html"
    write_report(name, store=str(store_path), out=out)
    page = out.read_text(encoding="utf-8")
    assert "<script" not in page and "<i>" not in page and "<b>" not in page and "<m>" not in page
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in page
    assert "study &quot;&lt;b&gt;one&lt;/b&gt;&quot; &amp; co" in page
    assert "&lt;i&gt;a&lt;/i&gt;" in page  # the best trial's value of x
    ET.fromstring(re.search(r'<svg class="chart".*?</svg>', page, re.S).group(0))  # still well-formed


# ---- the chart helper -----------------------------------------------------------------------------


POINTS = [ChartPoint(0, 5.0, "complete"), ChartPoint(1, 3.0, "complete"), ChartPoint(2, 1.0, "pruned"),
          ChartPoint(3, 4.0, "complete"), ChartPoint(4, 2.0, "complete")]


def test_best_so_far_follows_the_direction_and_ignores_pruned_trials():
    assert best_so_far(POINTS, "minimize") == [(0, 5.0), (1, 3.0), (3, 3.0), (4, 2.0)]
    assert best_so_far(POINTS, "maximize") == [(0, 5.0), (1, 5.0), (3, 5.0), (4, 5.0)]


@pytest.mark.parametrize("direction, best", [("maximize", 5.0), ("minimize", 2.0)])
def test_better_scores_are_drawn_higher_whatever_the_direction(direction, best):
    svg = ET.fromstring(trial_chart(POINTS, direction=direction, metric="m"))
    dots = [c for c in svg if c.tag == "circle" and c.get("fill") not in ("none", "#fff")]  # complete trials
    value = {float(c.get("cy")): float(c.find("title").text.rsplit(": ", 1)[1]) for c in dots}
    assert sorted(value.values()) == sorted(p.value for p in POINTS if p.state == "complete")
    assert value[min(value)] == best  # smallest y is highest on screen
    assert value[max(value)] == (2.0 if direction == "maximize" else 5.0)
    ring = [c for c in svg if c.tag == "circle" and c.get("fill") == "none"]
    assert len(ring) == 1 and float(ring[0].get("cy")) == min(value)  # the best trial is ringed


@pytest.mark.parametrize("direction", ["maximize", "minimize"])
def test_one_diverged_trial_sits_on_the_worse_edge_instead_of_squashing_the_rest(direction):
    sign = 1 if direction == "minimize" else -1
    scores = [0.40, 0.41, 0.42, 0.43, 0.44, 0.45, 0.46]
    points = [ChartPoint(n, sign * v, "complete") for n, v in enumerate(scores)]
    points.append(ChartPoint(len(scores), sign * 20.0, "pruned"))  # a model that diverged
    lo, hi = value_window([p.value for p in points], direction)
    # Tukey's far fence on the worse side: q3 + 3 IQR = 0.4525 + 3 * (0.4525 - 0.4175) = 0.5575
    assert (lo, hi) == pytest.approx(sorted((sign * 0.40, sign * 0.5575)))
    svg = ET.fromstring(trial_chart(points, direction=direction, metric="m"))
    dots = [c for c in svg if c.tag == "circle" and c.find("title") is not None
            and c.find("title").text.startswith("trial ")]
    complete = [float(c.get("cy")) for c in dots if ", complete:" in c.find("title").text]
    [diverged] = [float(c.get("cy")) for c in dots if ", pruned:" in c.find("title").text]
    frame = next(r for r in svg if r.tag == "rect")
    bottom = float(frame.get("y")) + float(frame.get("height"))
    # The rest span over a third of the chart's height (with the axis stretched to 20: 0.3 %).
    assert max(complete) - min(complete) > float(frame.get("height")) / 3
    assert min(complete) < diverged <= bottom  # better is higher; the diverged trial sits lowest


def test_ticks_are_round_numbers_inside_the_range():
    assert nice_ticks(0.0, 1.0) == pytest.approx([0.0, 0.2, 0.4, 0.6, 0.8, 1.0])
    assert nice_ticks(0.7812, 0.8433) == pytest.approx([0.80, 0.82, 0.84])
    assert nice_ticks(-3.0, 7.0) == pytest.approx([-2.0, 0.0, 2.0, 4.0, 6.0])
    assert nice_ticks(0, 7, integers=True) == [0, 2, 4, 6]


# ---- errors ---------------------------------------------------------------------------------------


def test_an_unknown_study_is_a_one_line_error_with_exit_2(cli, searched, tmp_path):
    store, _ = searched
    result = cli("report", "fan", "--store", str(store), "--out", str(tmp_path / "x.html"))
    assert result.code == 2
    assert result.err.count("\n") == 1 and "no study named 'fan'" in result.err and "did you mean fam" in result.err
    assert not (tmp_path / "x.html").exists()


@pytest.mark.parametrize("kind", ["missing", "not a database"])
def test_an_unreadable_store_is_a_one_line_error_with_exit_2(cli, tmp_path, kind):
    store = tmp_path / "studies.db"
    if kind == "not a database":
        store.write_text("these are not the studies you are looking for\n")
    result = cli("report", "fam", "--store", str(store), "--out", str(tmp_path / "x.html"))
    assert result.code == 2 and result.err.count("\n") == 1 and " — " in result.err  # message — hint
    assert not (tmp_path / "x.html").exists()


@pytest.mark.parametrize("where", ["missing folder", "under a file", "a folder"])
def test_an_unwritable_output_path_is_a_one_line_error_with_exit_2(cli, searched, tmp_path, where):
    store, _ = searched
    (tmp_path / "plain.txt").write_text("x")
    out = {"missing folder": tmp_path / "nope" / "r.html", "under a file": tmp_path / "plain.txt" / "r.html",
           "a folder": tmp_path}[where]
    result = cli("report", "fam", "--store", str(store), "--out", str(out))
    assert result.code == 2, result.out
    assert result.err.startswith("tunelab: error: ") and result.err.count("\n") == 1 and " — " in result.err
    assert [p.name for p in tmp_path.iterdir()] == ["plain.txt"]  # no temporary file left behind


def test_report_help_teaches_with_an_example(cli):
    result = cli("report", "--help")
    assert result.code == 0
    assert "Example:" in result.out and "tunelab report sales" in result.out and "--out" in result.out
