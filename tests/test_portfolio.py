"""The offline portfolio build (benchmarks/build_portfolio.py): greedy construction, --exclude, the shipped file."""

from __future__ import annotations

import copy
import json
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from benchmarks import build_portfolio as bp  # noqa: E402
from tunelab.space import Member, load_portfolio  # noqa: E402
from tunelab.space._portfolio import SHIPPED  # noqa: E402

TASKS = ("binary", "multiclass", "regression")


# --------------------------------------------------------------------------- greedy on a known matrix


def _row(name: str, scores: list[float | None], task: str = "binary", direction: str = "maximize",
         seconds: float = 1.0) -> dict:
    return {"name": name, "task": task, "metric": "m", "direction": direction, "rows": 100, "columns": 5,
            "scores": scores, "seconds": [seconds] * len(scores), "errors": {}}


def _matrix(names: list[str], rows: list[dict], tasks: dict[str, tuple[str, ...]] | None = None) -> dict:
    members = [Member(n, "linear", (tasks or {}).get(n, TASKS), {"C": 1.0}) for n in names]
    return bp.new_matrix(members, seed=0, max_rows=100, rows=rows)


def test_greedy_adds_the_complement_rather_than_the_runner_up() -> None:
    # Normalised scores (W is each table's worst, so the others read as written):
    #   A  .75 .75 .75   the best single candidate (mean regret .25)
    #   A2 .74 .74 .74   nearly as good, but adds nothing to A
    #   B  1   1   0     good where A is not best...
    #   C  0   0   1     ...and C where B fails
    # Greedy takes A, then B (regret [0, 0, .25]), then C (regret 0) and stops: nothing lowers it further.
    # Ranking by mean score alone would take A, A2, B.  The third table is a loss (lower is better).
    names = ["W", "A", "A2", "B", "C"]
    rows = [_row("t1", [0.5, 0.875, 0.87, 1.0, 0.5]),
            _row("t2", [10.0, 17.5, 17.4, 20.0, 10.0]),
            _row("t3", [2.0, 1.25, 1.26, 2.0, 1.0], task="regression", direction="minimize")]
    matrix = _matrix(names, rows)
    norm = bp.normalised(rows, [bp._member_from(c) for c in matrix["candidates"]])
    np.testing.assert_allclose(norm[:, 1], [0.75, 0.75, 0.75])
    picked, curve = bp.greedy(norm, 5)
    assert [names[i] for i in picked] == ["A", "B", "C"]
    np.testing.assert_allclose(curve, [0.25, 0.25 / 3, 0.0])
    two = bp.choose(matrix, k=2)
    assert [m.name for m in two.members] == ["A", "B"]
    assert two.regret_by_task == {"binary": 0.0, "regression": 0.25}


def test_failed_fits_and_other_tasks_count_as_the_worst() -> None:
    # A failed on t1 (None) and B does not serve regression: neither may look good there.
    names = ["A", "B", "C"]
    rows = [_row("t1", [None, 0.9, 0.5]), _row("t2", [3.0, 1.0, 2.0], task="regression", direction="minimize")]
    matrix = _matrix(names, rows, tasks={"B": ("binary", "multiclass")})
    norm = bp.normalised(rows, [bp._member_from(c) for c in matrix["candidates"]])
    np.testing.assert_allclose(norm, [[0.0, 1.0, 0.0], [0.0, 0.0, 1.0]])
    assert [m.name for m in bp.choose(matrix, k=3).members] == ["B", "C"]


def test_ties_go_to_the_cheaper_candidate() -> None:
    rows = [_row("t1", [1.0, 1.0, 0.0])]
    rows[0]["seconds"] = [4.0, 2.0, 1.0]
    choice = bp.choose(_matrix(["slow", "fast", "worst"], rows), k=1)
    assert [m.name for m in choice.members] == ["fast"]
    assert choice.members[0].cost == 1.0


# --------------------------------------------------------------------------- a toy corpus, scored for real


def _toy_tables() -> list[bp.Table]:
    """Three tiny seeded tables whose best models differ: a linear boundary, steps, rings."""
    rng = np.random.default_rng(0)
    n = 150
    x = rng.normal(size=(n, 4))
    linear = pd.DataFrame(x, columns=["a", "b", "c", "d"])
    linear["y"] = np.where(x @ [2.0, -1.5, 1.0, 0.0] + rng.normal(0, 0.5, n) > 0, "yes", "no")
    u = rng.uniform(-1, 1, size=(n, 3))
    steps = pd.DataFrame(u, columns=["a", "b", "c"])
    steps["y"] = 3.0 * ((u[:, 0] > 0) & (u[:, 1] > 0)) + rng.normal(0, 0.2, n)
    p = rng.normal(size=(n, 2))
    radius = np.hypot(p[:, 0], p[:, 1])
    rings = pd.DataFrame(p, columns=["a", "b"])
    rings["noise"] = rng.normal(size=n)
    rings["y"] = np.where(radius < 0.8, "inner", np.where(radius < 1.4, "middle", "outer"))
    return [bp.Table("linear_toy", "binary", "y", linear), bp.Table("steps_toy", "regression", "y", steps),
            bp.Table("rings_toy", "multiclass", "y", rings)]


TOY_CANDIDATES = [
    Member("lin", "linear", TASKS, {"C": {"per": "rows_per_column", "value": 0.05},
                                    "alpha": {"per": "rows", "value": 0.001}}),
    Member("gb", "hist_gb", TASKS, {"learning_rate": 0.3, "max_iter": 20, "max_leaf_nodes": 8,
                                    "min_samples_leaf": {"per": "rows", "value": 0.05}}),
    Member("rf", "random_forest", TASKS, {"n_estimators": 20, "max_features": 1.0,
                                          "min_samples_leaf": {"per": "rows", "value": 0.01}}),
    Member("knn", "knn", TASKS, {"n_neighbors": {"per": "sqrt_rows", "value": 0.5}, "weights": "distance"}),
    Member("svm", "svm", TASKS, {"C": 1.0, "gamma": {"per": "columns", "value": 1.0}}),
]


@pytest.fixture(scope="module")
def toy_matrix() -> dict:
    rows = [bp.evaluate_table(table, TOY_CANDIDATES, seed=0) for table in _toy_tables()]
    assert all(not row["errors"] for row in rows), [row["errors"] for row in rows]
    return bp.new_matrix(TOY_CANDIDATES, seed=0, max_rows=150, rows=rows)


def _without(matrix: dict, name: str) -> dict:
    deleted = copy.deepcopy(matrix)
    deleted["datasets"] = [r for r in deleted["datasets"] if r["name"] != name]
    return deleted


def _best_on_average(matrix: dict, skip: str | None = None) -> str:
    """The best single candidate by mean normalised score, worked out here without the build's code."""
    means = np.zeros(len(matrix["candidates"]))
    rows = [r for r in matrix["datasets"] if r["name"] != skip]
    for row in rows:
        s = np.array(row["scores"], dtype=float) * (-1 if row["direction"] == "minimize" else 1)
        means += (s - s.min()) / (s.max() - s.min()) / len(rows)
    return matrix["candidates"][int(np.argmax(means))]["name"]


def test_exclude_is_the_matrix_that_never_held_the_table(toy_matrix: dict) -> None:
    names = [r["name"] for r in toy_matrix["datasets"]]
    changed = []
    for name in names:
        for k in (1, 2, 3):
            left_out = bp.choose(toy_matrix, k, exclude=[name])
            never_held = bp.choose(_without(toy_matrix, name), k)
            assert left_out.members == never_held.members  # names, values and costs alike
            assert left_out.curve == never_held.curve
            assert left_out.used == [n for n in names if n != name] and left_out.excluded == [name]
        # With one member the answer is the best on average: X decides it when X moves that best.
        with_it, without_it = bp.choose(toy_matrix, 1), bp.choose(toy_matrix, 1, exclude=[name])
        assert with_it.members[0].name == _best_on_average(toy_matrix)
        assert without_it.members[0].name == _best_on_average(toy_matrix, skip=name)
        if _best_on_average(toy_matrix) != _best_on_average(toy_matrix, skip=name):
            assert with_it.members != without_it.members
            changed.append(name)
    assert changed, "the toy corpus should have a table that decides a member"


def test_exclude_option_writes_a_portfolio_that_never_saw_the_table(toy_matrix: dict, tmp_path: Path) -> None:
    stored = tmp_path / "matrix.json.gz"
    bp.save_matrix(toy_matrix, stored)
    assert bp.load_matrix(stored) == json.loads(json.dumps(toy_matrix))
    out = tmp_path / "held-back.json"
    assert bp.main(["--matrix", str(stored), "--exclude", "rings_toy", "--k", "2", "--out", str(out)]) == 0
    portfolio = load_portfolio(out)
    assert portfolio is not None
    expected = bp.choose(_without(toy_matrix, "rings_toy"), 2).members
    assert list(portfolio.members) == expected
    assert portfolio.built["excluded"] == ["rings_toy"]
    assert "rings_toy" not in portfolio.built["dataset_names"] and portfolio.built["datasets"] == 2
    with pytest.raises(KeyError):
        bp.choose(toy_matrix, 2, exclude=["not_a_table"])


# --------------------------------------------------------------------------- the shipped file


def _small_tables(tmp_path: Path) -> list:
    """The demo data and three scikit-learn tables of different tasks, loaded as a user's files are."""
    from make_demo import make_members
    from sklearn.datasets import load_breast_cancer, load_diabetes, load_wine

    from tunelab.data import load_dataset

    frames = [("demo", make_members(160, seed=7), "renewed", None)]
    for name, loader, task in (("breast_cancer", load_breast_cancer, "binary"), ("wine", load_wine, "multiclass"),
                               ("diabetes", load_diabetes, "regression")):
        frame = loader(as_frame=True).frame
        frames.append((name, frame.sample(n=min(len(frame), 150), random_state=0), "target", task))
    out = []
    for name, frame, target, task in frames:
        path = tmp_path / f"{name}.csv"
        frame.to_csv(path, index=False)
        out.append(load_dataset(path, target, task))
    assert {d.task for d in out} == set(TASKS)
    return out


@pytest.fixture(scope="module")
def portfolio_file(toy_matrix: dict, tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The shipped file when there is one; else the portfolio the build writes for the toy corpus."""
    if SHIPPED.exists():
        return SHIPPED
    out = tmp_path_factory.mktemp("portfolio") / "portfolio.json"
    bp.write_portfolio(toy_matrix, out, k=len(TOY_CANDIDATES))
    return out


def test_every_member_builds_a_working_pipeline(portfolio_file: Path, tmp_path: Path) -> None:
    from tunelab.models import build_pipeline
    from tunelab.ops import data_shape

    portfolio = load_portfolio(portfolio_file)
    assert portfolio is not None and portfolio.members
    assert portfolio.built["datasets"] == len(portfolio.built["dataset_names"])
    for dataset in _small_tables(tmp_path):
        members = portfolio.for_task(dataset.task)
        assert members, f"no member serves {dataset.task}"
        cardinality = dataset.cardinality
        for member in members:
            config = member.config(*data_shape(dataset))
            assert config["family"] == member.family
            # Few rounds or trees: this checks that every value is one the model accepts, not its score.
            small = {k: min(v, 5) if k.endswith((".max_iter", ".n_estimators")) else v for k, v in config.items()}
            pipeline = build_pipeline(small, dataset.roles, cardinality, dataset.task)
            pipeline.fit(dataset.X, dataset.y)
            assert len(pipeline.predict(dataset.X.iloc[:5])) == 5, (member.name, dataset.task)


def test_every_candidate_of_the_full_build_is_a_valid_configuration() -> None:
    from sklearn.base import clone

    from tunelab.models import build_pipeline

    candidates = bp.sample_candidates()
    assert len(candidates) == bp.DEFAULT_CANDIDATES and len({m.name for m in candidates}) == len(candidates)
    assert bp.sample_candidates(10) == candidates[:10]  # a quick run scores the start of the full list
    assert {m.family for m in candidates} == set(bp.FAMILIES)
    roles = {"x": "numeric", "colour": "categorical"}
    for task in TASKS:
        for member in candidates:
            config = member.config(1500, 12)
            for name in ("n_neighbors", "min_samples_leaf"):
                if name in member.values:
                    assert 1 <= config[f"{member.family}.{name}"] <= 1500
            model = build_pipeline(config, roles, {"colour": 3}, task).named_steps["model"]
            clone(model)._validate_params()  # scikit-learn's own check of every parameter's type and range


# --------------------------------------------------------------------------- the leave-one-out report


def _eval_row(name: str, seed: int, warm: float | None, cold: float, budget: str = "60s",
              metric: str = "roc_auc") -> dict:
    return {"dataset": name, "task": "binary", "metric": metric, "seed": seed, "portfolio": [],
            "runs": {budget: {"warm": {"score": warm}, "cold": {"score": cold}}}}


def test_eval_counts_wins_and_judges_60s_by_the_seed_spread() -> None:
    from benchmarks import portfolio_eval as pe

    assert pe.budget_args("10t") == ["--trials", "10"] and pe.budget_args("20s") == ["--budget", "20s"]
    # Two tables, two seeds: warm wins t1 (AUC), loses t2 (a loss metric) by a little, noisily.
    rows = [_eval_row("t1", 0, 0.82, 0.80), _eval_row("t1", 1, 0.81, 0.80),
            _eval_row("t2", 0, 0.51, 0.50, metric="log_loss"), _eval_row("t2", 1, 0.49, 0.50, metric="log_loss")]
    summary = pe.summarise(rows, "60s")
    assert (summary["wins"], summary["ties"], summary["losses"]) == (1, 1, 0)  # t2 pools to a tie
    assert summary["below_beyond_spread"] == []
    assert summary["target_met"]
    # A clear loss on every seed is worse beyond the spread.
    worse = [_eval_row(t, s, 0.70 + 0.001 * s, 0.80) for t in ("t1", "t2") for s in (0, 1)]
    summary = pe.summarise(worse, "60s")
    assert summary["below_beyond_spread"] == ["t1", "t2"] and not summary["target_met"]
    # At 10 trials the target is the share of wins; a failed warm run loses.
    rows = [_eval_row(t, 0, w, 0.5, budget="10t") for t, w in (("a", 0.6), ("b", 0.6), ("c", None))]
    summary = pe.summarise(rows, "10t")
    assert summary["wins"] == 2 and summary["losses"] == 1 and not summary["target_met"]
