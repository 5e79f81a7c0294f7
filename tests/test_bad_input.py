"""Bad input: one line naming the problem and the fix, exit code 2, and the store left byte-identical."""

from __future__ import annotations

import sqlite3
from pathlib import Path

import pandas as pd
import pytest

from conftest import digest, small_frame


def one_line_error(result) -> str:
    lines = [ln for ln in result.err.strip().splitlines() if ln.strip()]
    assert result.code == 2, (result.code, result.err)
    assert len(lines) == 1, result.err
    assert lines[0].startswith("tunelab: error: ")
    assert "Traceback" not in result.err
    return lines[0]


@pytest.fixture(scope="module")
def seeded_template(tmp_path_factory) -> tuple[Path, Path]:
    """One store holding a finished study, built once per module (its data file beside it)."""
    from tunelab.engine import Budget
    from tunelab.ops import RunRequest, run_study

    folder = tmp_path_factory.mktemp("seeded")
    data = folder / "small.csv"
    small_frame().to_csv(data, index=False)
    store = folder / "seeded.db"
    run_study(RunRequest(data=data, target="y", budget=Budget(trials=2), store=str(store), study="first"))
    return store, data


@pytest.fixture
def seeded_store(tmp_path, seeded_template) -> Path:
    """A private copy of the seeded store (so 'unchanged' is a real check)."""
    import shutil

    template, data = seeded_template
    store = tmp_path / "seeded.db"
    shutil.copy(template, store)
    shutil.copy(data, tmp_path / "small.csv")
    with sqlite3.connect(store) as conn:
        conn.execute("update tl_study set data_path=?", (str(tmp_path / "small.csv"),))
        conn.commit()
        conn.execute("pragma wal_checkpoint(truncate)")
    return store


def write(tmp_path: Path, name: str, content: bytes) -> Path:
    path = tmp_path / name
    path.write_bytes(content)
    return path


BAD_FILES = {
    "empty file": ("empty.csv", b"", "empty"),
    "header only": ("header.csv", b"a,b,y\n", "no rows"),
    "not utf-8": ("latin.csv", "a,b,y\n1,caf\xe9,1\n2,x,0\n".encode("latin-1"), "not UTF-8"),
    "duplicate columns": ("dup.csv", b"a,a,y\n1,2,1\n3,4,0\n", "duplicate column"),
    "binary file": ("bin.csv", b"\x00\x01\x02\x03" * 100, "binary"),
}


@pytest.mark.parametrize("case", list(BAD_FILES))
def test_bad_data_files_are_refused(case, tmp_path, seeded_store, cli):
    name, content, expected = BAD_FILES[case]
    before = digest(seeded_store)
    line = one_line_error(cli("run", str(write(tmp_path, name, content)), "--target", "y", "--budget", "10s",
                              "--store", str(seeded_store)))
    assert expected in line
    assert digest(seeded_store) == before


def frame_case(tmp_path: Path, frame: pd.DataFrame) -> Path:
    path = tmp_path / "case.csv"
    frame.to_csv(path, index=False)
    return path


def test_missing_target_column_suggests_close_names(tmp_path, seeded_store, cli, small_csv):
    before = digest(seeded_store)
    line = one_line_error(cli("run", str(small_csv), "--target", "Y1", "--budget", "10s", "--store", str(seeded_store)))
    assert "'Y1' is not in the data" in line
    assert digest(seeded_store) == before


@pytest.mark.parametrize("target_values, expected", [
    ([None] * 6, "all missing"),
    (["a"] * 6, "single class"),
    ([1.0] * 6, "single class"),
])
def test_unlearnable_targets_are_refused(tmp_path, seeded_store, cli, target_values, expected):
    frame = pd.DataFrame({"x": range(6), "z": list("abcabc"), "y": target_values})
    before = digest(seeded_store)
    line = one_line_error(cli("run", str(frame_case(tmp_path, frame)), "--target", "y", "--budget", "10s",
                              "--store", str(seeded_store)))
    assert expected in line
    assert digest(seeded_store) == before


def test_constant_regression_target_is_refused(tmp_path, seeded_store, cli):
    frame = pd.DataFrame({"x": range(30), "y": [2.5] * 30})
    line = one_line_error(cli("run", str(frame_case(tmp_path, frame)), "--target", "y", "--task", "regression",
                              "--budget", "10s", "--store", str(seeded_store)))
    assert "constant" in line


@pytest.mark.parametrize("budget", ["abc", "0", "-3m"])
def test_bad_budgets_are_refused(budget, seeded_store, cli, small_csv):
    before = digest(seeded_store)
    line = one_line_error(cli("run", str(small_csv), "--target", "y", "--budget", budget, "--store", str(seeded_store)))
    assert "budget" in line
    assert digest(seeded_store) == before


def test_unknown_study_is_refused(seeded_store, cli):
    before = digest(seeded_store)
    for verb in (["resume", "nope"], ["status", "nope"], ["export", "nope", "--out", "m.zip"]):
        line = one_line_error(cli(*verb, "--store", str(seeded_store)))
        assert "no study named 'nope'" in line
    assert digest(seeded_store) == before


def test_unwritable_store_path_is_refused(tmp_path, cli, small_csv):
    line = one_line_error(cli("run", str(small_csv), "--target", "y", "--budget", "5s",
                              "--store", str(tmp_path / "missing-folder" / "s.db")))
    assert "does not exist" in line
    locked = tmp_path / "locked"
    locked.mkdir()
    locked.chmod(0o500)
    try:
        import os

        if os.geteuid() != 0:  # root can write anywhere; the check is meaningful for users
            line = one_line_error(cli("run", str(small_csv), "--target", "y", "--budget", "5s",
                                      "--store", str(locked / "s.db")))
            assert "cannot write" in line
    finally:
        locked.chmod(0o700)


def test_a_store_that_is_not_sqlite_is_refused_and_untouched(tmp_path, cli, small_csv):
    store = write(tmp_path, "notes.db", b"these are my notes, not a database\n" * 20)
    before = digest(store)
    line = one_line_error(cli("run", str(small_csv), "--target", "y", "--budget", "5s", "--store", str(store)))
    assert "not a SQLite database" in line
    assert digest(store) == before


def test_a_corrupt_sqlite_store_is_refused_and_untouched(tmp_path, cli, seeded_store, small_csv):
    data = bytearray(seeded_store.read_bytes())
    data[100:4096] = b"\xff" * (4096 - 100)  # wreck the schema page, keep the header
    corrupt = write(tmp_path, "corrupt.db", bytes(data))
    before = digest(corrupt)
    line = one_line_error(cli("status", "--store", str(corrupt)))
    assert "corrupt" in line or "not a" in line
    assert digest(corrupt) == before


def test_a_foreign_sqlite_database_is_not_written_into(tmp_path, cli, small_csv):
    store = tmp_path / "app.db"
    with sqlite3.connect(store) as conn:
        conn.execute("create table customers (id integer)")
    before = digest(store)
    line = one_line_error(cli("run", str(small_csv), "--target", "y", "--budget", "5s", "--store", str(store)))
    assert "not a tunelab store" in line
    assert digest(store) == before


def test_a_store_from_a_newer_tunelab_is_refused(tmp_path, cli, seeded_store):
    with sqlite3.connect(seeded_store) as conn:
        conn.execute("update tl_meta set value='99' where key='schema_version'")
        conn.commit()
        conn.execute("pragma wal_checkpoint(truncate)")
    line = one_line_error(cli("status", "--store", str(seeded_store)))
    assert "newer tunelab" in line


def test_a_data_file_that_changed_under_a_study_is_refused(tmp_path, cli, seeded_store):
    import sqlite3 as sq

    with sq.connect(seeded_store) as conn:
        data_path = Path(conn.execute("select data_path from tl_study where name='first'").fetchone()[0])
    small_frame(seed=1).to_csv(data_path, index=False)
    before = digest(seeded_store)
    line = one_line_error(cli("resume", "first", "--store", str(seeded_store)))
    assert "changed" in line and "--accept-changed-data" in line
    assert digest(seeded_store) == before


def test_missing_data_file_is_refused(tmp_path, cli, store_path):
    line = one_line_error(cli("run", str(tmp_path / "nope.csv"), "--target", "y", "--budget", "5s",
                              "--store", str(store_path)))
    assert "not found" in line
    assert not store_path.exists()


def test_unknown_metric_for_the_task_is_refused(cli, small_csv, store_path):
    line = one_line_error(cli("run", str(small_csv), "--target", "y", "--metric", "rmse", "--budget", "5s",
                              "--store", str(store_path)))
    assert "does not fit a binary task" in line
    assert not store_path.exists()


def test_debug_shows_the_traceback(cli, small_csv, store_path):
    with pytest.raises(Exception):  # noqa: B017 - any error: the point is that --debug lets it out
        cli("--debug", "run", str(small_csv), "--target", "nope", "--budget", "5s", "--store", str(store_path))


@pytest.mark.parametrize("case", list(BAD_FILES))
def test_profile_refuses_the_same_bad_files_in_one_line(case, tmp_path, cli):
    name, content, expected = BAD_FILES[case]
    line = one_line_error(cli("profile", str(write(tmp_path, name, content)), "--target", "y"))
    assert expected in line


def test_profile_refuses_a_missing_target_and_a_bad_budget(cli, small_csv):
    assert "is not in the data" in one_line_error(cli("profile", str(small_csv), "--target", "nope"))
    assert "budget" in one_line_error(cli("profile", str(small_csv), "--target", "y", "--budget", "0"))
    assert "rmse" in one_line_error(cli("profile", str(small_csv), "--target", "y", "--metric", "rmse"))


def test_a_space_file_offering_the_gamma_loss_for_a_target_below_zero_is_refused(tmp_path, cli, store_path):
    from tunelab.space import FamilySpec, ParamSpec, SpaceSpec

    data = tmp_path / "signed.csv"
    pd.DataFrame({"x": range(60), "y": [v - 30.0 for v in range(60)]}).to_csv(data, index=False)
    space = tmp_path / "space.json"
    space.write_text(SpaceSpec(families={"hist_gb": FamilySpec({"loss": ParamSpec(
        "categorical", choices=("gamma", "squared_error"))})}).to_json(), encoding="utf-8")
    line = one_line_error(cli("run", str(data), "--target", "y", "--trials", "1", "--space", str(space),
                              "--store", str(store_path)))
    assert "gamma" in line and "above zero" in line and "drop that choice" in line
    assert not store_path.exists()  # refused before anything is written
