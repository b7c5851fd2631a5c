"""The number filters pages use for days and percentages."""

from __future__ import annotations

import pytest

from server.templating import audit_value, days, form_number, share_percent


@pytest.mark.parametrize(
    ("value", "shown"),
    [
        (None, "–"),
        (0, "0"),
        (12, "12"),
        (12.5, "12.5"),
        (12.04, "12"),
        (0.01, "< 0.1"),  # not "0": it is some effort
        (-0.01, "> −0.1"),
        (2_500_000, "2,500,000"),
    ],
)
def test_days_show_one_decimal_and_never_hide_a_small_effort(
    value: float | None, shown: str
) -> None:
    assert days(value) == shown


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
