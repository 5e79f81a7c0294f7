"""A stop asked for by a signal is never lost, even when its exception is swallowed."""

from __future__ import annotations

import time

import pytest

from tunelab.engine import FakeClock, ForkRunner, Limits, StopRequested, TrialResult, clear_stop, request_stop


def _slow(config, report):
    time.sleep(30)
    return TrialResult(0.0)


def test_a_stop_swallowed_while_a_trial_process_starts_is_raised_at_the_runners_next_poll():
    # SIGTERM landing in logging's at-fork hook: Python prints "Exception ignored" and goes on.
    request_stop(StopRequested("SIGTERM", 143))
    runner = ForkRunner(_slow)
    started = time.monotonic()
    with pytest.raises(StopRequested):
        runner.run({}, lambda step, value: False, Limits(None, None), FakeClock())
    assert time.monotonic() - started < 5  # the trial process was killed, not waited for
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
