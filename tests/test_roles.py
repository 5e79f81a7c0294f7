"""Column roles: each column is read as what it is, with the reason shown by ``profile``."""

from __future__ import annotations

import pandas as pd
import pytest

from tunelab.data._roles import infer_role


@pytest.mark.parametrize("values", [
    ["2024-01-05", "2024-02-11", "2023-12-30"],
    ["05/01/2024 10:30", "11/02/2024 08:00", "30/12/2023 23:59"],
    ["5 March 2024", "11 April 2024", "30 December 2023"],
    ["Mar 5", "Apr 11", "Dec 30"],
])
def test_text_that_holds_dates_is_a_datetime_column(values: list[str]) -> None:
    assert infer_role("seen", pd.Series(values * 20)).role == "datetime"


def test_ordinals_are_categories_not_days_of_the_month() -> None:
    # pandas' mixed-format parser reads "1st" as the first of the current month
    column = pd.Series(["1st", "2nd", "3rd", "3rd"] * 30)
    assert infer_role("passenger_class", column).role == "categorical"


def test_numbers_stored_as_text_are_not_dates() -> None:
    assert infer_role("code", pd.Series(["12", "7", "2024"] * 20)).role != "datetime"


def test_reading_roles_prints_no_warnings() -> None:
    # a user sees these on the terminal of every run, profile and export
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("error")
        for values in (["2024-01-05", "Mar 5"], ["1st", "2nd"], ["red", "blue"]):
            infer_role("column", pd.Series(values * 30))
