"""`importance` and `freeze` on real studies: the engine's own trial records, the CLI, new phases."""

from __future__ import annotations

import json
import math

import pytest

from tunelab.engine import ROUNDS_ATTR, Budget, FakeClock, SearchSettings, TrialResult
from tunelab.ops import run_objective_study, study_importance
from tunelab.space import FamilySpec, ParamSpec, SpaceSpec

PI = math.pi
ISHIGAMI = SpaceSpec(params={f"x{i}": ParamSpec("float", low=-PI, high=PI) for i in (1, 2, 3)})


def ishigami(config, report):
    # Ishigami & Homma (1990); a = 7, b = 0.1 as in Saltelli et al. 2008, The Primer
    x1, x2, x3 = config["x1"], config["x2"], config["x3"]
    return TrialResult(math.sin(x1) + 7 * math.sin(x2) ** 2 + 0.1 * x3 ** 4 * math.sin(x1))


@pytest.mark.slow
def test_ishigami_through_the_engine_ranks_x2_over_x1_over_x3(store_path):
    # Analytic first-order Sobol indices S1 = 0.314, S2 = 0.442, S3 = 0 (Saltelli et al. 2008,
    # Global Sensitivity Analysis: The Primer); normalised over the three: 0.415 / 0.585 / 0.
    run_objective_study("ishigami", ishigami, ISHIGAMI, Budget(trials=1000), store=str(store_path),
                        sampler="random", seed=0, clock=FakeClock(), settings=SearchSettings(heartbeat_interval=None))
    _, decisions = study_importance("ishigami", store=str(store_path))
    report = decisions.importance
    share = {p: report.row(p).importance for p in ("x1", "x2", "x3")}
    assert share["x2"] > share["x1"] > share["x3"]
    assert share["x3"] < 0.05
    total = sum(share.values())
    assert share["x2"] / total == pytest.approx(0.585, abs=0.05)
    assert share["x1"] / total == pytest.approx(0.415, abs=0.05)


def two_family_space() -> SpaceSpec:
    return SpaceSpec(families={
        "a": FamilySpec({"strong": ParamSpec("float", low=0, high=1), "idle": ParamSpec("float", low=0, high=1)}),
        "b": FamilySpec({"k": ParamSpec("int", low=1, high=10)}),
    })


def two_family(config, report):
    if config["family"] == "a":
        return TrialResult(3 * config["a.strong"])
    return TrialResult(1.0 + 0.01 * config["b.k"])


@pytest.fixture(scope="module")
def two_family_template(tmp_path_factory):
    path = tmp_path_factory.mktemp("fam") / "fam.db"
    run_objective_study("fam", two_family, two_family_space(), Budget(trials=200), store=str(path),
                        sampler="random", seed=1, clock=FakeClock(), settings=SearchSettings(heartbeat_interval=None))
    return path


@pytest.fixture
def two_family_store(two_family_template, store_path):
    """A private copy of a 200-trial two-family study (tests add phases to it)."""
    import shutil
    import sqlite3

    with sqlite3.connect(two_family_template) as conn:
        conn.execute("pragma wal_checkpoint(truncate)")
    shutil.copy(two_family_template, store_path)
    return store_path


def test_importance_table_judges_conditional_parameters_inside_their_family(cli, two_family_store):
    result = cli("importance", "fam", "--store", str(two_family_store), "--json")
    assert result.code == 0, result.err
    rows = {(r["param"], r["family"]): r for r in json.loads(result.out)["rows"]}
    assert rows[("a.strong", "a")]["verdict"] == "keep tuning"
    assert rows[("a.idle", "a")]["action"] in ("no measurable effect", "freeze")
    text = cli("importance", "fam", "--store", str(two_family_store)).out
    assert "a.strong" in text and "verdict" in text


def test_freeze_auto_adds_a_phase_and_resume_samples_the_narrowed_space(cli, two_family_store):
    result = cli("freeze", "fam", "--auto", "--store", str(two_family_store), "--json")
    assert result.code == 0, result.err
    frozen = json.loads(result.out)["frozen"]
    assert "a.idle" in frozen and "a.strong" not in frozen
    detail = json.loads(cli("status", "fam", "--store", str(two_family_store), "--json").out)
    assert [p["phase"] for p in detail["phases"]] == [1, 2]


def test_freeze_by_hand_checks_names_values_and_ranges(cli, two_family_store):
    store = str(two_family_store)
    ok = cli("freeze", "fam", "b.k=4", "--store", store, "--json")
    assert ok.code == 0 and json.loads(ok.out)["frozen"] == {"b.k": 4}
    for bad, words in ((["nope=1"], "unknown parameter 'nope'"), (["b.k=40"], "outside its range"),
                       (["b.k=x"], "not a number"), (["family=c"], "not a choice")):
        result = cli("freeze", "fam", *bad, "--store", store)
        assert result.code == 2 and words in result.err and result.err.count("\n") == 1


def test_importance_refuses_unknown_studies_and_studies_without_finished_trials(cli, store_path, small_csv):
    assert cli("run", str(small_csv), "--target", "y", "--trials", "1", "--store", str(store_path),
               "--study", "s", "-q").code == 0
    assert "no study named" in cli("importance", "nope", "--store", str(store_path)).err
    from tunelab.ops import create_objective_study

    create_objective_study("empty", ISHIGAMI, Budget(trials=5), store=str(store_path))
    result = cli("importance", "empty", "--store", str(store_path))
    assert result.code == 2 and "no finished trials" in result.err


@pytest.mark.slow
def test_freeze_auto_then_resume_on_the_demo_data_runs_in_the_narrowed_space(cli, tmp_path):
    from make_demo import make_members

    data = tmp_path / "members.csv"
    make_members(800, seed=3).to_csv(data, index=False)
    store = str(tmp_path / "demo.db")
    assert cli("run", str(data), "--target", "renewed", "--budget", "40s", "--store", store, "--study", "d",
               "-q").code == 0
    frozen = cli("freeze", "d", "--auto", "--store", store, "--json")
    if frozen.code != 0:  # too few trials to freeze anything by verdict: freeze a knob by hand instead
        assert "can be dropped or frozen" in frozen.err
        frozen = cli("freeze", "d", "family=hist_gb", "--store", store, "--json")
    assert frozen.code == 0, frozen.err
    first = json.loads(frozen.out)["first_trial"]
    resumed = cli("resume", "d", "--extend", "20s", "--store", store, "--json")
    assert resumed.code == 0, resumed.err
    detail = json.loads(cli("status", "d", "--store", store, "--json").out)
    assert len(detail["phases"]) == 2
    import optuna

    fixed = json.loads(frozen.out)["frozen"]
    study = optuna.load_study(study_name="d", storage=f"sqlite:///{store}")
    later = [t for t in study.trials if t.number >= first and t.params]
    assert later, "resume ran trials in the new phase"
    for trial in later:
        for key, value in fixed.items():
            if key == "family":
                assert trial.params.get("family", value) == value
            else:
                assert key not in trial.params  # a frozen knob is no longer sampled


def test_importance_says_the_boosting_rounds_row_is_a_ceiling(cli, store_path):
    # Each boosting trial keeps the rounds its first fold scored best (tunelab.engine.ROUNDS_ATTR),
    # so the sampled max_iter only bounds them; the table must not read as the rounds used.
    space = SpaceSpec(families={"hist_gb": FamilySpec({"max_iter": ParamSpec("int", low=100, high=400),
                                                       "learning_rate": ParamSpec("float", low=0.01, high=0.3)})})

    def boosting(config, report):
        ceiling = config["hist_gb.max_iter"]
        return TrialResult(config["hist_gb.learning_rate"], extras={ROUNDS_ATTR: ceiling // 4})

    run_objective_study("gb", boosting, space, Budget(trials=30), store=str(store_path), sampler="random", seed=2,
                        clock=FakeClock(), settings=SearchSettings(heartbeat_interval=None))
    data = json.loads(cli("importance", "gb", "--store", str(store_path), "--json").out)
    assert data["notes"] == ["hist_gb.max_iter is a ceiling, not the rounds used: each trial kept the rounds its first "
                             "fold scored best (median 25% of the ceiling over 30 trials)"]
    assert "note: hist_gb.max_iter is a ceiling" in cli("importance", "gb", "--store", str(store_path)).out
