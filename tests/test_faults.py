"""Faults beyond kill -9, each reproduced for real: a disk that fills, SQLite's page limit, a database
connection that drops, a worker frozen past the stale-heartbeat limit, and two launches of one study
racing each other.  Each asserts: nothing lost, integrity ok, the exact exit code, one line."""

from __future__ import annotations

import os
import shutil
import signal
import subprocess
import time
from pathlib import Path

import pytest

from benchmarks._faults import (
    TUNELAB,
    CuttableLink,
    can_mount,
    fill,
    pg_database,
    pg_facts,
    read_store,
    small_disk,
    worker_processes,
)
from conftest import small_frame


def one_line(stderr: str) -> str:
    lines = [ln for ln in stderr.strip().splitlines() if ln.strip()]
    assert len(lines) == 1 and "Traceback" not in stderr, stderr
    assert lines[0].startswith("tunelab: error: "), stderr
    return lines[0]


def tunelab(*args: str, timeout: float = 300, **kwargs) -> subprocess.CompletedProcess[str]:
    return subprocess.run([*TUNELAB, *args], capture_output=True, text=True, timeout=timeout, **kwargs)


def wait_until(predicate, timeout: float, every: float = 0.5) -> bool:
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        if predicate():
            return True
        time.sleep(every)
    return False


# ---------------------------------------------------------------- a full disk


@pytest.mark.slow
def test_a_disk_that_fills_during_run_stops_it_in_one_line_and_resume_goes_on_after_space_is_freed(tmp_path):
    if os.geteuid() != 0:
        pytest.skip("mounting a size-limited tmpfs needs root (CI runs as root)")
    assert can_mount(), "this machine should let root mount a tmpfs"
    with small_disk(4096) as disk:
        data = disk / "small.csv"
        small_frame(600).to_csv(data, index=False)
        store = disk / "s.db"
        filler = fill(disk, leave_kb=400)
        first = tunelab("run", str(data), "--target", "y", "--budget", "40s", "--store", str(store),
                        "--study", "full", "-q")
        assert first.returncode == 2, "the disk never filled: " + first.stderr
        line = one_line(first.stderr)
        assert f"disk full at {store}" in line and "tunelab resume full" in line
        before = read_store(store)
        assert before.integrity == "ok"
        filler.unlink()
        again = tunelab("resume", "full", "--extend", "10s", "--store", str(store), "-q")
        assert again.returncode == 0, again.stderr
        after = read_store(store)
        assert after.integrity == "ok" and after.studies == 1
        assert before.complete <= after.complete  # every trial completed before the fault is still there
        assert all(n == 1 for n in after.retries.values())  # interrupted configs re-queued once each
        assert not list(disk.glob(".*.tmp"))


def test_sqlites_page_limit_gives_a_real_disk_full_error_and_nothing_is_lost(tmp_path, small_csv, monkeypatch, cli):
    # Where a disk cannot be mounted, SQLite's own page limit raises the same "database or disk is
    # full" error from inside SQLite: the store's connections get a limit a few trials above its size.
    from tunelab.store import _store

    store = tmp_path / "pages.db"
    assert cli("run", str(small_csv), "--target", "y", "--trials", "2", "--store", str(store), "--study", "p",
               "-q").code == 0
    pages = read_pages(store)
    pragmas = _store._sqlite_pragmas

    def limited(dbapi_conn, record):
        pragmas(dbapi_conn, record)
        dbapi_conn.execute(f"PRAGMA max_page_count={pages + 1}")

    monkeypatch.setattr(_store, "_sqlite_pragmas", limited)
    result = cli("resume", "p", "--more-trials", "10", "--store", str(store), "-q")  # fills within a few trials
    assert result.code == 2
    line = one_line(result.err)
    assert line.startswith(f"tunelab: error: disk full at {store}") and "then tunelab resume p" in line
    facts = read_store(store)
    assert facts.integrity == "ok" and len(facts.complete) >= 2
    monkeypatch.setattr(_store, "_sqlite_pragmas", pragmas)
    assert cli("resume", "p", "--more-trials", "1", "--store", str(store), "-q").code == 0  # the trials left
    assert facts.complete <= read_store(store).complete


def read_pages(store: Path) -> int:
    import contextlib
    import sqlite3

    with contextlib.closing(sqlite3.connect(store)) as conn:
        conn.execute("pragma wal_checkpoint(truncate)")
        return int(conn.execute("pragma page_count").fetchone()[0])


# ---------------------------------------------------------------- a lost database connection


def _pg_run(link: CuttableLink, url: str, data: Path, budget: str) -> subprocess.Popen[str]:
    proxied = url.replace("127.0.0.1:5432", f"127.0.0.1:{link.port}")
    return subprocess.Popen([*TUNELAB, "run", str(data), "--target", "y", "--budget", budget, "--study", "net",
                             "-q", "--store", proxied], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


@pytest.mark.postgres
@pytest.mark.slow
def test_a_dropped_database_connection_is_waited_for_and_the_running_trial_requeued_once(tmp_path):
    data = tmp_path / "small.csv"
    small_frame(600).to_csv(data, index=False)
    link = CuttableLink(("127.0.0.1", 5432))
    with pg_database() as url:
        run = _pg_run(link, url, data, "60s")
        assert wait_until(lambda: _finished(url) >= 3, 45), "the search never got going"
        link.cut()
        time.sleep(6)  # the network is down for a while ...
        link.restore()  # ... and comes back inside the 30 s the search waits
        out, err = run.communicate(timeout=120)
        assert run.returncode == 0, err
        facts = pg_facts(url)
    link.close()
    assert "Traceback" not in err
    assert all(n == 1 for n in facts.retries.values())  # the interrupted trial ran again exactly once
    assert facts.states.get("RUNNING", 0) == 0 and facts.studies == 1
    assert [state for _, state in facts.launches] == ["finished"]


@pytest.mark.postgres
@pytest.mark.slow
def test_a_connection_that_never_comes_back_stops_the_run_in_one_line_and_resume_goes_on(tmp_path):
    data = tmp_path / "small.csv"
    small_frame(600).to_csv(data, index=False)
    link = CuttableLink(("127.0.0.1", 5432))
    with pg_database() as url:
        run = _pg_run(link, url, data, "60s")
        assert wait_until(lambda: _finished(url) >= 2, 45), "the search never got going"
        before = pg_facts(url)
        link.cut()
        out, err = run.communicate(timeout=120)  # it waits 30 s for the database, then gives up
        assert run.returncode == 2
        assert "the database at" in one_line(err)
        again = tunelab("resume", "net", "--extend", "5s", "--store", url, "-q")
        assert again.returncode == 0, again.stderr
        after = pg_facts(url)
    link.close()
    assert before.complete <= after.complete
    assert all(n == 1 for n in after.retries.values())
    assert after.states.get("RUNNING", 0) == 0


def _finished(url: str) -> int:
    """Trials that reached a verdict: most trials are pruned, and on a loaded machine (a benchmark
    beside the test run) three complete ones could take longer than the wait (seen once)."""
    states = _facts(url).states
    return states.get("COMPLETE", 0) + states.get("PRUNED", 0)


def _facts(url: str):
    try:
        return pg_facts(url)
    except Exception:  # the tables are not there yet
        from benchmarks._faults import StoreFacts

        return StoreFacts("ok", {}, set(), {}, [], 0)


# ---------------------------------------------------------------- a frozen worker


@pytest.mark.slow
def test_a_worker_frozen_past_the_stale_limit_records_nothing_after_it_was_declared_dead(tmp_path):
    import psutil

    data = tmp_path / "small.csv"
    small_frame(600).to_csv(data, index=False)
    store = tmp_path / "frozen.db"
    run = subprocess.Popen([*TUNELAB, "run", str(data), "--target", "y", "--budget", "80s", "--jobs", "2",
                            "--store", str(store), "--study", "frozen", "-q"],
                           stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    worker = None

    def worker_started() -> bool:
        nonlocal worker
        kids = worker_processes(run.pid, store)
        worker = kids[0] if kids else None
        return worker is not None and store.exists() and any(state == "running" for _, state in
                                                             read_store(store).launches[1:])

    assert wait_until(worker_started, 60), "the worker never started"
    time.sleep(3)
    frozen = [worker, *worker.children(recursive=True)]  # the worker and the trial it is running
    for proc in frozen:
        proc.send_signal(signal.SIGSTOP)
    time.sleep(55)  # well past the 30 s after which another worker declares it dead (it looks between trials,
    # so a loaded machine needs the extra room before the worker wakes and beats again)
    for proc in frozen:
        try:
            proc.send_signal(signal.SIGCONT)
        except psutil.NoSuchProcess:
            pass
    out, err = run.communicate(timeout=180)
    assert run.returncode == 0, err
    facts = read_store(store)
    assert facts.integrity == "ok"
    worker_launch = [lid for lid, _ in facts.launches[1:]]
    assert [state for lid, state in facts.launches if lid in worker_launch] == ["lost"], (err, facts)
    assert all(n == 1 for n in facts.retries.values()) and facts.retries  # its trial ran again, once
    assert facts.states.get("RUNNING", 0) == 0
    from tunelab.store import Store

    with Store.open(str(store)) as st:
        record = st.get_study("frozen")
        wall, _ = st.spent(record.id)
    assert wall <= 80 + max(0.05 * 80, 3.0) + 2.0  # its frozen time is not counted twice


# ---------------------------------------------------------------- two launches at once


@pytest.mark.slow
def test_two_launches_of_one_study_at_once_end_in_one_study_and_a_one_line_refusal(tmp_path):
    data = tmp_path / "small.csv"
    small_frame(300).to_csv(data, index=False)
    for attempt in range(3):
        store = tmp_path / f"race{attempt}.db"
        runs = [subprocess.Popen([*TUNELAB, "run", str(data), "--target", "y", "--trials", "3", "--store",
                                  str(store), "--study", "same", "-q"], stdout=subprocess.PIPE,
                                 stderr=subprocess.PIPE, text=True) for _ in range(2)]
        done = [(r.wait(timeout=180), r.stderr.read()) for r in runs]  # type: ignore[union-attr]
        codes = sorted(code for code, _ in done)
        assert codes == [0, 2], done
        refusal = one_line(next(err for code, err in done if code == 2))
        assert "already exists" in refusal and "UNIQUE" not in refusal
        facts = read_store(store)
        assert facts.studies == 1 and len(facts.launches) == 1 and facts.integrity == "ok"


def test_the_fault_helpers_see_what_they_claim(tmp_path):
    # The proxy really forwards and really cuts: a connection through it talks to PostgreSQL's port.
    import socket

    server = socket.socket()
    server.bind(("127.0.0.1", 0))
    server.listen(1)
    link = CuttableLink(server.getsockname())
    client = socket.create_connection(("127.0.0.1", link.port))
    accepted, _ = server.accept()
    client.sendall(b"ping")
    assert accepted.recv(4) == b"ping"
    link.cut()
    assert accepted.recv(4) == b""  # the far side sees the link drop
    link.close()
    server.close()
    assert shutil.disk_usage(tmp_path).free > 0
