"""Kill a real `tunelab run` with SIGKILL at a chosen moment, resume it, and check nothing was lost.

Used by tests/test_crash_resume.py once and by benchmarks/crash_loop.py twenty times.
"""

from __future__ import annotations

import os
import signal
import sqlite3
import subprocess
import sys
import time
from dataclasses import dataclass
from pathlib import Path

TUNELAB = [sys.executable, "-m", "tunelab"]
HEARTBEAT_SECONDS = 2.0  # SearchSettings default


@dataclass
class CrashReport:
    completed_before: set[int]
    completed_after: set[int]
    killed_running: list[int]
    interrupted_after: set[int]
    retried: dict[int, int]
    ledger_seconds: float
    true_seconds: float
    integrity: str
    resume_code: int
    trial_numbers_unique: bool

    def problems(self) -> list[str]:
        out = []
        if not self.completed_before <= self.completed_after:
            out.append(f"completed trials lost: {sorted(self.completed_before - self.completed_after)}")
        if not set(self.killed_running) <= self.interrupted_after:
            out.append(f"killed trials not interrupted: {self.killed_running} vs {sorted(self.interrupted_after)}")
        if not set(self.killed_running) <= set(self.retried.values()):
            out.append(f"killed trials not re-run: {self.killed_running} vs retried {self.retried}")
        if abs(self.true_seconds - self.ledger_seconds) > HEARTBEAT_SECONDS + 0.5:
            out.append(f"ledger {self.ledger_seconds:.2f}s vs true {self.true_seconds:.2f}s")
        if self.integrity != "ok":
            out.append(f"integrity_check: {self.integrity}")
        if self.resume_code != 0:
            out.append(f"resume exited {self.resume_code}")
        if not self.trial_numbers_unique:
            out.append("duplicate trial numbers")
        return out


def _query(store: Path, sql: str, args: tuple = ()) -> list[tuple]:
    conn = sqlite3.connect(f"file:{store}?mode=ro", uri=True, timeout=30)
    try:
        return conn.execute(sql, args).fetchall()
    finally:
        conn.close()


def _trials(store: Path, state: str) -> set[int]:
    return {r[0] for r in _query(store, "select number from trials where state = ?", (state,))}


def _owned_running(store: Path) -> set[int]:
    """Running trials that carry their launch (a trial is underway once it does), or nothing while a writer holds
    the store."""
    try:
        return {r[0] for r in _query(
            store, "select t.number from trials t join trial_user_attributes a on a.trial_id = t.trial_id "
                   "where t.state = 'RUNNING' and a.key = 'tl_launch'")}
    except sqlite3.OperationalError:
        return set()


def _wait_stopped(pid: int, timeout: float = 5.0) -> None:
    """Return once the process has actually stopped (SIGSTOP is delivered asynchronously; Linux /proc)."""
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        try:
            with open(f"/proc/{pid}/stat") as f:
                if f.read().rsplit(")", 1)[1].split()[0] in ("T", "t"):
                    return
        except OSError:
            return
        time.sleep(0.001)


def crash_and_resume(data: Path, store: Path, *, min_complete: int, extra_delay: float, pruning: str = "median",
                     trials_cap: int = 12, timeout: float = 120.0) -> CrashReport:
    """Run until ``min_complete`` trials finished and one is running, wait ``extra_delay``, SIGKILL, resume."""
    env = {**os.environ, "PYTHONUNBUFFERED": "1"}
    proc = subprocess.Popen(TUNELAB + ["run", str(data), "--target", "y", "--budget", "5m", "--trials",
                                       str(trials_cap), "--store", str(store), "--study", "crash", "--pruning",
                                       pruning, "-q"], stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, env=env)
    deadline = time.monotonic() + timeout
    try:
        while time.monotonic() < deadline:
            time.sleep(0.05)
            if proc.poll() is not None:
                raise RuntimeError(f"run ended before the kill: {proc.stderr.read().decode()[-500:]}")
            if not store.exists():
                continue
            try:
                done = _trials(store, "COMPLETE") | _trials(store, "PRUNED")
                running = _trials(store, "RUNNING")
            except sqlite3.OperationalError:
                continue
            if len(done) >= min_complete and running:
                break
        time.sleep(extra_delay)
        # The trial seen running may have ended during the delay, and one seen running can end
        # between the look and the kill: freeze the run, look, and kill only while a trial that
        # carries its launch is running (only the frozen process writes the store), else thaw it.
        while time.monotonic() < deadline:
            proc.send_signal(signal.SIGSTOP)
            _wait_stopped(proc.pid)
            if _owned_running(store):
                break
            proc.send_signal(signal.SIGCONT)
            time.sleep(0.005)
        proc.send_signal(signal.SIGKILL)
        killed_at = time.time()
        proc.wait(timeout=30)
        # A killed process writes nothing more: the store now shows exactly what the kill interrupted.
        completed_before = _trials(store, "COMPLETE")
        running_at_kill = sorted(_trials(store, "RUNNING"))
    finally:
        if proc.poll() is None:
            proc.kill()
    started, wall = _query(store, "select started_epoch, wall_seconds from tl_launch order by id limit 1")[0]
    resume = subprocess.run(TUNELAB + ["resume", "crash", "--store", str(store), "-q"], capture_output=True, env=env,
                            timeout=timeout)
    interrupted = {r[0] for r in _query(
        store, "select t.number from trials t join trial_user_attributes a on a.trial_id = t.trial_id "
               "where a.key = 'tl_state' and a.value_json = '\"interrupted\"'")}
    retried = {r[0]: int(r[1]) for r in _query(
        store, "select t.number, a.value_json from trials t join trial_user_attributes a on a.trial_id = t.trial_id "
               "where a.key = 'tl_retry_of'")}
    numbers = [r[0] for r in _query(store, "select number from trials")]
    integrity = _query(store, "pragma integrity_check")[0][0]
    return CrashReport(completed_before, _trials(store, "COMPLETE"), running_at_kill, interrupted, retried,
                       float(wall), killed_at - float(started), integrity, resume.returncode,
                       len(numbers) == len(set(numbers)))
