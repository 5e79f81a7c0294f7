"""Budgets: durations people type, totals that refuse nonsense, the overshoot promise."""

import pytest

from tunelab.engine import Budget, Spent, format_duration, overshoot_allowance, parse_duration, remaining
from tunelab.errors import BudgetError


@pytest.mark.parametrize("text, seconds", [("90s", 90), ("10m", 600), ("2h", 7200), ("1h30m", 5400),
                                           ("45", 45), ("0.5m", 30), (" 2m ", 120)])
def test_durations_people_type_are_understood(text, seconds):
    assert parse_duration(text) == seconds


@pytest.mark.parametrize("text", ["abc", "0", "0s", "-5m", "", "10x", "m10", "1h30"])
def test_unreadable_or_non_positive_durations_are_refused(text):
    with pytest.raises(BudgetError):
        parse_duration(text)


def test_a_study_needs_time_or_a_trial_count():
    with pytest.raises(BudgetError):
        Budget()
    assert Budget(trials=5).wall_seconds is None


def test_remaining_subtracts_what_every_launch_spent():
    left = remaining(Budget(600, 100, 50), Spent(250, 40, 10))
    assert left == (350, 60, 40)
    assert remaining(Budget(600), Spent(900, 0, 0))[0] == 0


def test_extending_adds_to_the_box():
    assert Budget(600, trials=10).extended(300, 5) == Budget(900, None, 15)


def test_overshoot_allowance_is_five_percent_or_three_seconds():
    assert overshoot_allowance(60) == 3.0
    assert overshoot_allowance(3600) == 180.0


def test_durations_format_short():
    assert format_duration(75) == "1m15s"
    assert format_duration(7260) == "2h01m"
