"""A stop asked for by a signal is never lost, even when its exception is swallowed."""

from __future__ import annotations

import os
import time

import pytest

from tunelab.engine import FakeClock, ForkRunner, Limits, StopRequested, TrialResult, clear_stop, request_stop


def _slow(config, report):
    with open(config["pid_file"], "w") as handle:
        handle.write(str(os.getpid()))
    time.sleep(300)
    return TrialResult(0.0)


def test_a_stop_swallowed_while_a_trial_process_starts_is_raised_at_the_runners_next_poll(tmp_path):
    # SIGTERM landing in logging's at-fork hook: Python prints "Exception ignored" and goes on.
    # The trial process is killed, not waited for (how fast is measured in benchmarks/stop_latency.py).
    import psutil

    pid_file = tmp_path / "trial.pid"
    request_stop(StopRequested("SIGTERM", 143))
    runner = ForkRunner(_slow)
    with pytest.raises(StopRequested):
        runner.run({"pid_file": str(pid_file)}, lambda step, value: False, Limits(None, None), FakeClock())
    if pid_file.exists():  # the child got as far as its first line before the stop landed
        pid = int(pid_file.read_text())
        assert not psutil.pid_exists(pid) or psutil.Process(pid).status() == psutil.STATUS_ZOMBIE
    assert runner.live_cpu() == 0.0


def test_a_stop_is_raised_once_and_then_forgotten():
    request_stop(KeyboardInterrupt())
    runner = ForkRunner(lambda config, report: TrialResult(1.0))
    with pytest.raises(KeyboardInterrupt):
        runner.run({}, lambda step, value: False, Limits(None, None), FakeClock())
    outcome = runner.run({}, lambda step, value: False, Limits(None, None), FakeClock())
    assert outcome.kind == "complete"
    clear_stop()


def test_a_stop_during_a_held_block_waits_for_its_end():
    # While a trial's start or end is written, a stop is recorded and raised when the block ends.
    from tunelab.engine._stop import hold_stops, holding

    done = []
    with pytest.raises(KeyboardInterrupt):
        with hold_stops():
            assert holding()
            request_stop(KeyboardInterrupt())
            done.append("the write finished")
    assert done == ["the write finished"] and not holding()
