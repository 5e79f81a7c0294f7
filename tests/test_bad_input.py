"""Bad input: one line naming the problem and the fix, exit code 2, and the store left byte-identical."""

from __future__ import annotations

import sqlite3
import sys
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
    # Without --debug the same mistake is one line; with it, the error itself propagates.
    from tunelab.errors import InputError

    assert "nope" in one_line_error(cli("run", str(small_csv), "--target", "nope", "--budget", "5s",
                                        "--store", str(store_path)))
    with pytest.raises(InputError, match="nope"):
        cli("--debug", "run", str(small_csv), "--target", "nope", "--budget", "5s", "--store", str(store_path))


def test_a_bug_is_one_line_naming_it_with_exit_1_and_debug_shows_the_traceback(cli, store_path, monkeypatch):
    # Exit 1 tells a script "tunelab failed by itself", apart from exit 2, "fix your input".
    import tunelab.ops

    def broken(*args, **kwargs):
        raise ValueError("y_prob contains values greater than 1: 1.0000000186\nsecond line")

    monkeypatch.setattr(tunelab.ops, "list_studies", broken)
    result = cli("status", "--store", str(store_path))
    lines = [ln for ln in result.err.splitlines() if ln.strip()]
    assert result.code == 1 and len(lines) == 1 and "Traceback" not in result.err
    assert lines[0].startswith("tunelab: internal error: ValueError: y_prob contains values greater than 1")
    assert "--debug" in lines[0] and "second line" not in lines[0]
    with pytest.raises(ValueError, match="greater than 1"):
        cli("--debug", "status", "--store", str(store_path))


def test_a_bug_with_an_empty_message_is_named_by_its_type_alone(cli, store_path, monkeypatch):
    import tunelab.ops

    def broken(*args, **kwargs):
        raise KeyError()

    monkeypatch.setattr(tunelab.ops, "list_studies", broken)
    result = cli("status", "--store", str(store_path))
    assert result.code == 1 and result.err.startswith("tunelab: internal error: KeyError — a bug in tunelab")


def test_one_line_of_a_library_error_is_its_first_line_or_its_type():
    from tunelab.errors import first_line

    assert first_line(ValueError("  disk I/O error\n[SQL: INSERT ...]\n")) == "disk I/O error"
    assert first_line(OSError()) == "OSError"


def test_a_reader_that_goes_away_ends_the_command_quietly(cli, store_path, monkeypatch):
    import tunelab.ops

    def closed_pipe(*args, **kwargs):
        raise BrokenPipeError(32, "Broken pipe")

    monkeypatch.setattr(tunelab.ops, "list_studies", closed_pipe)
    monkeypatch.setattr(sys, "stdout", sys.stdout)  # the command points stdout at /dev/null; put it back after
    result = cli("status", "--store", str(store_path))
    assert result.code == 1 and result.err == ""


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


# ---------------------------------------------------------------- every verb x every class of bad input

# (verb and arguments, what the one line must say).  Placeholders: {store} the seeded store, {data} its
# data file, {model} a good model file of it, {damaged} that model with one byte changed in the middle,
# {missing} a path that does not exist, {empty} an empty file, {folder} a folder, {text} a text file.
BAD_INPUTS = {
    "missing file": [
        (["run", "{missing}", "--target", "y", "--budget", "5s", "--store", "{store}"], "not found"),
        (["profile", "{missing}", "--target", "y"], "not found"),
        (["predict", "{missing}", "{data}", "--out", "{folder}/p.csv"], "not found"),
        (["predict", "{model}", "{missing}", "--out", "{folder}/p.csv"], "not found"),
        (["resume", "first", "--data", "{missing}", "--store", "{store}"], "gone"),
        (["run", "{data}", "--target", "y", "--budget", "5s", "--space", "{missing}", "--store", "{store}"],
         "not found"),
    ],
    "empty file": [
        (["run", "{empty}", "--target", "y", "--budget", "5s", "--store", "{store}"], "empty"),
        (["profile", "{empty}", "--target", "y"], "empty"),
        (["predict", "{empty}", "{data}", "--out", "{folder}/p.csv"], "not a tunelab model file"),
        (["predict", "{model}", "{empty}", "--out", "{folder}/p.csv"], "empty"),
    ],
    "wrong type": [
        (["run", "{folder}", "--target", "y", "--budget", "5s", "--store", "{store}"], ""),
        (["predict", "{data}", "{data}", "--out", "{folder}/p.csv"], "not a tunelab model file"),
        (["run", "{data}", "--target", "y", "--budget", "5s", "--space", "{text}", "--store", "{store}"],
         "not valid JSON"),
        (["status", "--store", "{text}"], "not a SQLite database"),
        (["export", "first", "--out", "{folder}", "--store", "{store}"], "is a folder"),
        (["run", "{data}", "--target", "y", "--task", "ranking", "--budget", "5s", "--store", "{store}"], "ranking"),
    ],
    "unknown study": [
        ([verb, "nosuch", "--store", "{store}"], "no study named 'nosuch'")
        for verb in ("status", "resume", "worker", "importance", "report")
    ] + [
        (["freeze", "nosuch", "--auto", "--store", "{store}"], "no study named 'nosuch'"),
        (["export", "nosuch", "--out", "{folder}/m.zip", "--store", "{store}"], "no study named 'nosuch'"),
    ],
    "bad URL": [
        ([*verb, "--store", "nosuchdb://host/x"], "store URL scheme 'nosuchdb'")
        for verb in (["status"], ["status", "first"], ["resume", "first"], ["worker", "first"],
                     ["importance", "first"], ["freeze", "first", "--auto"], ["report", "first"],
                     ["export", "first", "--out", "{folder}/m.zip"],
                     ["run", "{data}", "--target", "y", "--budget", "5s"])
    ],
    "damaged model": [
        (["predict", "{damaged}", "{data}", "--out", "{folder}/p.csv"], "is damaged"),
    ],
    "bad number": [
        (["run", "{data}", "--target", "y", "--trials", "many", "--store", "{store}"], "--trials"),
        (["run", "{data}", "--target", "y", "--budget", "5s", "--jobs", "two", "--store", "{store}"], "--jobs"),
        (["status", "first", "--top", "x", "--store", "{store}"], "--top"),
        (["status", "first", "--worth", "lots", "--store", "{store}"], "--worth must be a number"),
        (["importance", "first", "--worth", "lots", "--store", "{store}"], "--worth must be a number"),
        (["importance", "first", "--tolerance", "tiny", "--store", "{store}"], "--tolerance"),
        (["report", "first", "--worth", "lots", "--store", "{store}"], "--worth must be a number"),
        (["resume", "first", "--worth", "lots", "--store", "{store}"], "--worth must be a number"),
        (["export", "first", "--trial", "best", "--out", "{folder}/m.zip", "--store", "{store}"], "--trial"),
        (["freeze", "first", "linear.C=lots", "--store", "{store}"], "is not a number"),
    ],
    "bad duration": [
        (["run", "{data}", "--target", "y", "--budget", "soon", "--store", "{store}"], "cannot read budget"),
        (["run", "{data}", "--target", "y", "--budget", "5s", "--cpu-budget", "-1m", "--store", "{store}"],
         "--cpu-budget"),
        (["resume", "first", "--extend", "later", "--store", "{store}"], "cannot read --extend"),
        (["profile", "{data}", "--target", "y", "--budget", "0"], "budget"),
        (["status", "first", "--horizon", "forever", "--store", "{store}"], "cannot read --horizon"),
        (["importance", "first", "--horizon", "0", "--store", "{store}"], "--horizon"),
        (["report", "first", "--horizon", "1x", "--store", "{store}"], "cannot read --horizon"),
    ],
}
CASES = [(klass, i, args, expected) for klass, rows in BAD_INPUTS.items() for i, (args, expected) in enumerate(rows)]


@pytest.fixture(scope="module")
def model_files(seeded_template, tmp_path_factory) -> tuple[Path, Path]:
    """A good model file of the seeded study, and a copy with one byte changed in the middle."""
    from tunelab.ops import export_model

    store, _ = seeded_template
    folder = tmp_path_factory.mktemp("models")
    good = folder / "good.zip"
    export_model("first", good, store=str(store))
    data = bytearray(good.read_bytes())
    data[len(data) // 2] ^= 0xFF
    damaged = folder / "damaged.zip"
    damaged.write_bytes(bytes(data))
    return good, damaged


@pytest.mark.parametrize("klass, index, args, expected", CASES, ids=[f"{c[0]}-{c[1]}" for c in CASES])
def test_every_verb_refuses_each_class_of_bad_input_in_one_line(klass, index, args, expected, tmp_path,
                                                                seeded_store, model_files, cli):
    (tmp_path / "empty.csv").write_bytes(b"")
    (tmp_path / "notes.txt").write_text("this is not a search space, nor a store\n", encoding="utf-8")
    folder = tmp_path / "out"
    folder.mkdir()
    places = {"store": str(seeded_store), "data": str(tmp_path / "small.csv"), "model": str(model_files[0]),
              "damaged": str(model_files[1]), "missing": str(tmp_path / "no-such-file.csv"),
              "empty": str(tmp_path / "empty.csv"), "folder": str(folder), "text": str(tmp_path / "notes.txt")}
    before = digest(seeded_store)
    line = one_line_error(cli(*[a.format(**places) for a in args]))
    assert expected in line
    assert digest(seeded_store) == before
    assert list(folder.iterdir()) == []  # nothing written, not even half a file
