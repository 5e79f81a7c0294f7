"""The shell surface: every verb teaches through --help and appears in the README; the package exports what it says."""

from __future__ import annotations

import importlib
import subprocess
import sys
from pathlib import Path

import pytest

from tunelab.cli import app

ROOT = Path(__file__).resolve().parents[1]
VERBS = sorted(c.name or c.callback.__name__ for c in app.registered_commands)


def test_the_design_verbs_exist():
    assert {"run", "resume", "status", "export", "predict", "importance", "freeze", "worker", "report"} <= set(VERBS)


@pytest.mark.parametrize("verb", VERBS)
def test_every_verb_has_help_text_and_is_in_the_readme(cli, verb):
    result = cli(verb, "--help")
    assert result.code == 0
    assert len(result.out.splitlines()) > 5
    assert f"tunelab {verb}" in (ROOT / "README.md").read_text()


def test_help_starts_fast_without_heavy_imports():
    code = ("import sys; from tunelab.cli import app; "
            "print(','.join(m for m in ('torch', 'sklearn', 'optuna') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.strip()
    assert out == ""


@pytest.mark.parametrize("module", ["tunelab.data", "tunelab.space", "tunelab.models", "tunelab.engine",
                                    "tunelab.store", "tunelab.insight", "tunelab.ops"])
def test_public_modules_export_exactly_what_they_list(module):
    mod = importlib.import_module(module)
    for name in mod.__all__:
        assert hasattr(mod, name), f"{module}.{name} is listed but missing"


def _on_a_terminal(args: list[str], env: dict[str, str]) -> str:
    """Run ``tunelab ARGS`` with its output on a pseudo-terminal, as in a user's shell; return what it drew."""
    import os
    import pty
    import subprocess
    import sys

    leader, follower = pty.openpty()
    proc = subprocess.Popen([sys.executable, "-m", "tunelab", *args], stdout=follower, stderr=follower,
                            env={**os.environ, "TERM": "xterm-256color", "COLUMNS": "120", **env})
    os.close(follower)
    chunks = []
    while True:
        try:
            chunk = os.read(leader, 65536)
        except OSError:  # the terminal closed with the process
            break
        if not chunk:
            break
        chunks.append(chunk)
    proc.wait(timeout=60)
    os.close(leader)
    return b"".join(chunks).decode("utf-8", "replace")


def test_no_color_is_respected_on_a_terminal(cli, store_path, small_csv, monkeypatch):
    monkeypatch.delenv("NO_COLOR", raising=False)
    cli("run", str(small_csv), "--target", "y", "--trials", "1", "--store", str(store_path), "-q")
    args = ["status", "--store", str(store_path)]
    assert "\x1b[" in _on_a_terminal(args, {})  # on a terminal the table is styled ...
    assert "\x1b[" not in _on_a_terminal(args, {"NO_COLOR": "1"})  # ... unless NO_COLOR says not to


def test_jobs_auto_is_the_cpus_the_affinity_allows():
    # A process narrowed to one CPU (as taskset or a container does) runs one worker under auto.
    import subprocess
    import sys

    code = ("import os; from tunelab.ops._jobs import resolve_jobs, usable_cpus; "
            "os.sched_setaffinity(0, {sorted(os.sched_getaffinity(0))[0]}); "
            "jobs = resolve_jobs('auto'); print(jobs.count, '|', jobs.why)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    count, why = out.split("|")
    assert int(count) == 1 and "affinity" in why


def test_jobs_must_be_auto_or_a_whole_number(cli, small_csv, store_path):
    result = cli("run", str(small_csv), "--target", "y", "--trials", "1", "--jobs", "0", "--store", str(store_path))
    assert result.code == 2 and "--jobs must be at least 1" in result.err
    assert not store_path.exists()


def test_a_run_keeps_optunas_own_warnings_off_the_terminal(cli, store_path, small_csv):
    # optuna logs its storage's retries as warnings ("Falling back to a slower alternative" when a
    # connection drops, seen in benchmarks/fault_loop.py); tunelab reports store faults itself.
    import optuna

    assert cli("run", str(small_csv), "--target", "y", "--trials", "2", "--store", str(store_path), "-q").code == 0
    assert optuna.logging.get_verbosity() == optuna.logging.ERROR


def test_library_warnings_stay_off_the_terminal_once_optuna_is_imported(tmp_path, small_csv):
    # optuna configures its logger at INFO when first imported, after the command line set errors
    # only; a database outage then printed its "falling back to a slower alternative" warning
    # above tunelab's one-line error (seen in tests/test_faults.py).
    script = ("import sys\nfrom tunelab.cli import main\n"
              f"try:\n    main(sys.argv[1:] + ['run', {str(small_csv)!r}, '--target', 'y', '--trials', '2', "
              f"'--jobs', '1', '--store', {str(tmp_path / 's.db')!r}, '-q'])\nexcept SystemExit:\n    pass\n"
              "import optuna\nprint(optuna.logging.get_verbosity())\n")
    quiet = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, timeout=300)
    assert quiet.stdout.split()[-1] == "40", quiet.stderr  # logging.ERROR
    (tmp_path / "s.db").unlink()
    loud = subprocess.run([sys.executable, "-c", script, "--debug"], capture_output=True, text=True, timeout=300)
    assert loud.stdout.split()[-1] == "30", loud.stderr  # logging.WARNING
