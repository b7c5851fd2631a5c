"""The number filters pages use for days and percentages."""

from __future__ import annotations

import pytest

from server.templating import day_word, days, form_number, in_days, share_percent
from server.wording import audit_value


@pytest.mark.parametrize(
    ("value", "shown"),
    [
        (None, "–"),
        (0, "0"),
        (12, "12"),
        (12.5, "12.5"),
        (12.04, "12.04"),
        (12.001, "12"),
        (0.25, "0.25"),  # a quarter-day step, not "0.2"
        (0.7 * 13 * 0.85, "7.74"),  # 7.735 by hand, 7.734999... in floats
        (1.365, "1.37"),
        (0.004, "< 0.01"),  # not "0": it is some effort
        (-0.004, "> −0.01"),
        (2_500_000, "2,500,000"),
    ],
)
def test_days_show_two_decimals_and_never_hide_a_small_effort(
    value: float | None, shown: str
) -> None:
    assert days(value) == shown


@pytest.mark.parametrize(
    ("value", "shown"), [(1, "1 day"), (1.001, "1 day"), (0.5, "0.5 days"), (2, "2 days")]
)
def test_a_number_of_days_takes_the_unit_in_the_right_number(value: float, shown: str) -> None:
    assert in_days(value) == shown
    assert shown.endswith(day_word(value))


@pytest.mark.parametrize(
    ("share", "shown"), [(1.0, "100 %"), (0.5, "50 %"), (0.125, "12.5 %"), (None, "–")]
)
def test_shares_show_as_the_percentage_typed(share: float | None, shown: str) -> None:
    assert share_percent(share) == shown


def test_audit_values_read_as_words() -> None:
    assert audit_value(0.33332999999999996) == "0.33333"
    assert audit_value(None) == "–"
    assert audit_value(True) == "yes"
    assert audit_value([{"period_id": 1, "days_off": 4.0, "allocation": None}]) == (
        "period id 1, days off 4, allocation –"
    )
    assert audit_value([]) == "none"


def test_form_numbers_keep_every_typed_digit() -> None:
    """A share typed as 33.333 % came back as 33.33, and saving the row stored 33.33."""
    assert form_number(0.33333 * 100) == "33.333"
    assert form_number(0.755) == "0.755"
    assert form_number(2.0) == "2"
    assert form_number(None) == ""
