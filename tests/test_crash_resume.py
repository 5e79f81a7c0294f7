"""Crash safety: SIGKILL a real search mid-trial, resume it, and lose nothing."""

from __future__ import annotations

import signal
import subprocess
import sys
import time

import pytest

from crash_harness import crash_and_resume


@pytest.mark.slow
def test_kill_9_mid_trial_loses_nothing_and_resume_reruns_the_killed_config(tmp_path, small_csv):
    report = crash_and_resume(small_csv, tmp_path / "crash.db", min_complete=3, extra_delay=0.2)
    assert report.killed_running, "the kill should land while a trial runs"
    assert report.problems() == []


@pytest.mark.slow
@pytest.mark.parametrize("sig, code", [(signal.SIGINT, 130), (signal.SIGTERM, 143)])
def test_ctrl_c_and_sigterm_record_the_running_trial_and_exit_with_the_signal_code(tmp_path, small_csv, sig, code):
    store = tmp_path / "stop.db"
    proc = subprocess.Popen([sys.executable, "-m", "tunelab", "run", str(small_csv), "--target", "y",
                             "--budget", "5m", "--store", str(store), "--study", "stop", "--pruning", "off"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    import sqlite3

    deadline = time.monotonic() + 60
    while time.monotonic() < deadline:
        time.sleep(0.05)
        if store.exists():
            try:
                conn = sqlite3.connect(f"file:{store}?mode=ro", uri=True)
                done = conn.execute("select count(*) from trials where state='COMPLETE'").fetchone()[0]
                running = conn.execute("select count(*) from trials where state='RUNNING'").fetchone()[0]
                conn.close()
            except sqlite3.OperationalError:
                continue
            if done >= 2 and running:
                break
    proc.send_signal(sig)
    out, err = proc.communicate(timeout=30)
    assert proc.returncode == code, err
    assert "stopped by" in out
    assert "tunelab resume stop" in out
    conn = sqlite3.connect(store)
    states = conn.execute("select state from tl_launch").fetchall()
    interrupted = conn.execute("select count(*) from trial_user_attributes where key='tl_state' "
                               "and value_json='\"interrupted\"'").fetchone()[0]
    running = conn.execute("select count(*) from trials where state='RUNNING'").fetchone()[0]
    conn.close()
    assert states == [("interrupted",)]
    assert running == 0
    reported = int(out.split(" interrupted)")[0].rsplit(" ", 1)[-1])
    assert interrupted == reported  # 1, unless the signal landed between two trials
